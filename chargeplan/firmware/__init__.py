"""What charger firmware consumes, in one room.

- :mod:`~chargeplan.firmware.setpoints` — the setpoint document (integers in mV, mA, s,
  0.1 °C), its canonical form and digest;
- :mod:`~chargeplan.firmware.document` — the document's pydantic model (its JSON Schema);
- :mod:`~chargeplan.firmware.c_header` — the C header (template ``templates/setpoints.h.j2``);
- :mod:`~chargeplan.firmware.image` — the binary image with its CRC-32;
- :mod:`~chargeplan.firmware.tables` — the temperature-compensation table;
- :mod:`~chargeplan.firmware.thermistor` — the NTC divider's ADC-code table;
- :mod:`~chargeplan.firmware.check` — the independent checker of hand-edited files.
"""
