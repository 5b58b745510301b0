"""Per-epoch RV precision, stellar jitter, exposure time and hours (plain floats / arrays).

Units: V magnitudes, seconds for exposures and overheads, m/s for velocities, hours for totals.

Photon-noise scaling: the number of detected photo-electrons grows as t 10^(-0.4 m), and the
photon-limited RV error as its inverse square root (Bouchy, Pepe & Queloz 2001, A&A 374, 733), so
sigma_phot(m, t) = sigma_ref 10^(0.2 (m - m_ref)) sqrt(t_ref / t). The per-epoch budget adds the
photon noise, the instrumental floor and the stellar jitter in quadrature (common practice, no
source); jitter is correlated within a night, so epochs are counted, not exposures.
"""
from __future__ import annotations

import numpy as np

__all__ = ["photon_precision", "epoch_precision", "exposure_for_precision", "default_exposure",
           "stellar_jitter", "hours_needed"]


def photon_precision(vmag, exposure_s, sigma_ref_ms, vmag_ref, exposure_ref_s):
    """Photon-limited RV error (m/s) of one exposure.

    sigma = sigma_ref 10^(0.2 (V - V_ref)) sqrt(t_ref / t) (scaling from Bouchy, Pepe & Queloz 2001).

    Parameters
    ----------
    vmag : float or ndarray, V magnitude of the star
    exposure_s : float or ndarray, exposure time, seconds
    sigma_ref_ms : float, photon-limited error of the reference exposure, m/s
    vmag_ref : float, V magnitude of the reference exposure
    exposure_ref_s : float, exposure time of the reference exposure, seconds

    Returns
    -------
    ndarray, photon-limited RV error, m/s
    """
    return (np.asarray(sigma_ref_ms, float) * 10.0 ** (0.2 * (np.asarray(vmag, float) - vmag_ref))
            * np.sqrt(exposure_ref_s / np.asarray(exposure_s, float)))


def epoch_precision(vmag, exposure_s, sigma_ref_ms, vmag_ref, exposure_ref_s, floor_ms, jitter_ms=0.0):
    """Total per-epoch RV error (m/s): photon noise, instrument floor and jitter in quadrature.

    Parameters
    ----------
    vmag : float or ndarray, V magnitude of the star
    exposure_s : float or ndarray, exposure time, seconds
    sigma_ref_ms : float, photon-limited error of the reference exposure, m/s
    vmag_ref : float, V magnitude of the reference exposure
    exposure_ref_s : float, exposure time of the reference exposure, seconds
    floor_ms : float or ndarray, instrumental noise floor, m/s
    jitter_ms : float or ndarray, stellar jitter, m/s

    Returns
    -------
    ndarray, per-epoch RV error, m/s
    """
    ph = photon_precision(vmag, exposure_s, sigma_ref_ms, vmag_ref, exposure_ref_s)
    return np.sqrt(ph**2 + np.asarray(floor_ms, float) ** 2 + np.asarray(jitter_ms, float) ** 2)


def exposure_for_precision(sigma_phot_ms, vmag, sigma_ref_ms, vmag_ref, exposure_ref_s,
                           exposure_min_s=0.0, exposure_max_s=np.inf):
    """Exposure (s) whose photon-limited error is ``sigma_phot_ms``, clipped to [min, max].

    Inverse of :func:`photon_precision`: t = t_ref (sigma_ref 10^(0.2 dV) / sigma)^2.

    Parameters
    ----------
    sigma_phot_ms : float or ndarray, wanted photon-limited RV error, m/s
    vmag : float or ndarray, V magnitude of the star
    sigma_ref_ms : float, photon-limited error of the reference exposure, m/s
    vmag_ref : float, V magnitude of the reference exposure
    exposure_ref_s : float, exposure time of the reference exposure, seconds
    exposure_min_s, exposure_max_s : float, clipping bounds of the exposure, seconds

    Returns
    -------
    ndarray, exposure time, seconds
    """
    s = np.asarray(sigma_ref_ms, float) * 10.0 ** (0.2 * (np.asarray(vmag, float) - vmag_ref))
    t = exposure_ref_s * (s / np.asarray(sigma_phot_ms, float)) ** 2
    return np.clip(t, exposure_min_s, exposure_max_s)


def default_exposure(vmag, jitter_ms, sigma_ref_ms, vmag_ref, exposure_ref_s, floor_ms,
                     exposure_min_s=0.0, exposure_max_s=np.inf):
    """Exposure (s) at which photon noise equals the floor and jitter combined, clipped.

    Past that point a longer exposure hardly lowers the per-epoch error, so another epoch is the
    better use of the time (common practice, no source).

    Parameters
    ----------
    vmag : float or ndarray, V magnitude of the star
    jitter_ms : float or ndarray, stellar jitter, m/s
    sigma_ref_ms : float, photon-limited error of the reference exposure, m/s
    vmag_ref : float, V magnitude of the reference exposure
    exposure_ref_s : float, exposure time of the reference exposure, seconds
    floor_ms : float or ndarray, instrumental noise floor, m/s
    exposure_min_s, exposure_max_s : float, clipping bounds of the exposure, seconds

    Returns
    -------
    ndarray, exposure time, seconds
    """
    target = np.sqrt(np.asarray(floor_ms, float) ** 2 + np.asarray(jitter_ms, float) ** 2)
    return exposure_for_precision(target, vmag, sigma_ref_ms, vmag_ref, exposure_ref_s,
                                  exposure_min_s, exposure_max_s)


def stellar_jitter(teff_k, logg_cgs):
    """Default stellar RV jitter (m/s) of a quiet star by effective temperature and log g.

    Classes follow the trends of Isaacson & Fischer 2010, ApJ 725, 875 (K dwarfs quietest, F
    dwarfs and subgiants higher) and Wright 2005, PASP 117, 657 (jitter grows with height above
    the main sequence). The numbers are values from memory of typical quiet-star jitters:
    K/M dwarfs (Teff < 5300 K) 1.8 m/s; G dwarfs (5300-6000 K) 2.5 m/s; F dwarfs (> 6000 K)
    4.5 m/s; subgiants and giants (log g < 3.9) 5.0 m/s. Unknown Teff (NaN) gives 3.0 m/s.
    Active or young stars exceed these: give a measured ``jitter_ms`` in the catalogue.

    Parameters
    ----------
    teff_k : float or ndarray, effective temperature, K (NaN = unknown)
    logg_cgs : float or ndarray, surface gravity log10(g / (cm s^-2)) (NaN = unknown)

    Returns
    -------
    ndarray, stellar RV jitter, m/s
    """
    teff = np.asarray(teff_k, float)
    logg = np.asarray(logg_cgs, float)
    dwarf = np.select([~np.isfinite(teff), teff < 5300.0, teff < 6000.0], [3.0, 1.8, 2.5], 4.5)
    return np.where(np.isfinite(logg) & (logg < 3.9), np.maximum(dwarf, 5.0), dwarf)


def hours_needed(n_epochs, exposure_s, overhead_s):
    """Telescope hours for ``n_epochs`` visits: N x (exposure + overhead) / 3600 (common practice).

    Parameters
    ----------
    n_epochs : int or ndarray, number of visits
    exposure_s : float or ndarray, exposure time per visit, seconds
    overhead_s : float or ndarray, overhead per visit, seconds

    Returns
    -------
    ndarray, telescope time, hours
    """
    return np.asarray(n_epochs, float) * (np.asarray(exposure_s, float) + overhead_s) / 3600.0
