"""Writers: readable text, the setpoint document, and (later) more formats."""
