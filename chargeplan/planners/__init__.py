"""Planners for many batteries at once.

- :mod:`~chargeplan.planners.bench` — a workshop's charging bench: channels, order, times;
- :mod:`~chargeplan.planners.storage` — a storage season: charge decay, top-ups, freeze risk;
- :mod:`~chargeplan.planners.readings` — state of charge from a reading, runtime under a load;
- :mod:`~chargeplan.planners.ventilation` — the room check of IEC 62485-2 cl. 7.

Planners hand the engine typed values (numbers in SI), never strings to parse again.
"""
