"""Building simulator for trying ventsup against a building before it touches a real window.

UNFINISHED: the simulator lands later (weather, zone thermal model, openings and
actuators, scripted scenarios, an MQTT bridge with a lock-step simulated clock,
and an in-process closed loop with the core). It depends on ``ventsup`` only for
configuration and shared physics; ``ventsup`` never imports the simulator.
"""
