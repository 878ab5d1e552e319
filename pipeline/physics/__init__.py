"""Published formulas: the coefficient forms (``forms``), the scaled fitting basis
(``basis``), equipartition bounds (``bounds``) and rigid-rotor/harmonic-oscillator
statistical mechanics (``statmech``). Depends only on ``core``."""
