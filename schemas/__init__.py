"""JSON Schemas of thermoledger's inputs and outputs, shipped inside the package as
``thermoledger.schemas`` (data only; read through ``thermoledger.core.schemas``)."""
