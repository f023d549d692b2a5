"""Shop-floor traveller service for PCB fabrication.

The Celery app lives in shopfloor.celery and is loaded by the quality app's ready()
hook, so importing a pure-core module (units, windows, SPC) does not pull in Django.
"""
