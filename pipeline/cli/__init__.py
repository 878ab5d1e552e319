"""The command line: parsing (``parse``), printing (``render``), the commands (``main``) and
the console entry point (``entry``). Only wires stages; no stage logic lives here."""
