"""Input models (battery file, charger channel, profile) and the setpoint document's schema."""

#: The setpoint document's format name and version (schema: ``model/setpoints.py``).
SETPOINT_FORMAT = "chargeplan-setpoints"
SETPOINT_VERSION = 3
