"""One module per priority layer, highest first: safety, protection, faults,
override, schedule, comfort, actuator care. :mod:`ventsup.core.decide` runs
them in that order and combines what they say."""
