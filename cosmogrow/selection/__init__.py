"""Selection effects: the physical selection models (mass cut, AGN flux limit, sphere-of-influence
resolution, host-mass cut), each a probit in the black-hole mass, their thresholds per object
compiled into a `SelectionSet`, and the normal-CDF helpers they share (docs/method.md#selection).
"""
