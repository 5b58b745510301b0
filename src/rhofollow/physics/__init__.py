"""Pure numerics: plain floats / numpy arrays in fixed internal units, no I/O, no astropy.units.

Internal units: days, radians, g/cm^3, solar masses and radii, Earth masses, m/s, kelvin.
"""
