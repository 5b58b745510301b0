"""rhofollow: eccentricity constraints from stellar-density mismatch and the follow-up plans that test them."""
__version__ = "0.1.0"
