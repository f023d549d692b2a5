"""Forecasting finish times from live queues (pure; no Django imports).

`calendar` turns shift calendars into working time, `steptimes` blends measured step times
with standard minutes, `engine` is the discrete-event simulation, `forecast` assembles a
floor's work in progress into it and reads P50 / P90 finishes, `queueing` holds the
closed-form results the engine is validated against.
"""
