"""The engineering: device model, stage analysis, search and planning.

No database and no terminal here: functions over numpy arrays and plain value
objects from :mod:`inventory.parts`.
"""
