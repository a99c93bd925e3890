"""truepull.integrate.balance: the torsion balance as a measuring instrument.

The oscillator and its equation of motion, the fit of recorded runs, the reduction of a measurement
to G with its corrections, the uncertainty budget (GUM and Monte Carlo) and the sensitivity of the
result to every body. Apart from the engine (fields, quadrature, pairs) in the parent package.
"""
