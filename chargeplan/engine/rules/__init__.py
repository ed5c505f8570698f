"""The rules, one module per phase. Importing this package registers them all."""

from chargeplan.engine.rules import (  # noqa: F401  (imported to register)
    compensate,
    derive,
    exclude,
    fit,
    interlock,
    stages,
    termination,
)
