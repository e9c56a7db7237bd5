"""Circuit simulations of the Owl Hollow boards (numpy only).

``rc_ladder`` (RC phase-shift ladder around a one-transistor amplifier), ``wien`` (Wien bridge
with diode limiting) and ``astable`` (timer relaxation oscillator). ``engine`` steps a linear
network closed through a nonlinear amplifier (exact discretisation of the linear part);
``trace`` keeps a waveform from power-on, extended on demand.
"""
