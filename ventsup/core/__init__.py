"""The pure core: no I/O, no clock, no threads, no global state.

:func:`ventsup.core.decide.decide` is the one decision function; the live
daemon, the replay and the simulator are drivers around it.
"""
