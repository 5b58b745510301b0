"""Eccentricity priors (physics/priors.py): tabulated moments and parsing."""
import numpy as np
import pytest

from rhofollow.physics.priors import PRIOR_NAMES, measured_prior, parse_prior


@pytest.mark.parametrize("spec,mean,boost", [
    ("kipping13", 0.2225, 1.1313),              # Beta(0.867, 3.03), Kipping 2013
    ("beta:1.12,3.09", 0.2660, 1.1715),         # Kipping 2013 short-period Beta (value from memory)
    ("vaneylen19-single", 0.2537, 1.1790),      # half-Gaussian 0.32, Van Eylen et al. 2019
    ("vaneylen19-multi", 0.0662, 1.0070),       # half-Gaussian 0.083, Van Eylen et al. 2019
    ("vaneylen15", 0.0614, 1.0048),             # Rayleigh 0.049, Van Eylen & Albrecht 2015
    ("uniform", 0.4950, 2.6734),                # uniform [0, 0.99)
])
def test_prior_moments(spec, mean, boost):
    # moments computed in REFERENCE section 4 (e truncated at 0.99): mean e and <1/(1 - e^2)>
    p = parse_prior(spec)
    assert p.mean() == pytest.approx(mean, abs=1.5e-3)
    assert p.mean_transit_boost == pytest.approx(boost, abs=2e-3)


def test_sampled_prior_matches_scipy_beta():
    # inverse-CDF draws of the tabulated Beta against scipy.stats.beta (reference library)
    from scipy import stats

    p = parse_prior("kipping13")
    u = np.linspace(0.01, 0.95, 30)
    assert np.allclose(p.ppf(u), stats.beta.ppf(u, 0.867, 3.03), atol=2e-3)


def test_measured_prior_is_centred():
    p = measured_prior(0.45, 0.04, 0.04)
    assert p.ppf(0.5) == pytest.approx(0.45, abs=2e-3)
    assert p.ppf(0.8413) - p.ppf(0.5) == pytest.approx(0.04, abs=2e-3)


@pytest.mark.parametrize("spec", ["gamma:1,2", "beta:1", "beta:-1,2", "rayleigh:abc", "uniform:1.5", "nonsense"])
def test_bad_prior_specs(spec):
    with pytest.raises(ValueError) as exc:
        parse_prior(spec)
    assert spec.split(":")[0] in str(exc.value) or "prior" in str(exc.value)


def test_every_named_prior_builds():
    for name in PRIOR_NAMES:
        p = parse_prior(name)
        assert np.all(np.diff(p.cdf) >= 0) and p.cdf[-1] == 1.0
