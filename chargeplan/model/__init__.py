"""Input models (battery file, charger channel, profile) and the setpoint document's schema."""

#: The setpoint document's format name and version (schema: ``firmware/document.py``).
SETPOINT_FORMAT = "chargeplan-setpoints"
SETPOINT_VERSION = 4
