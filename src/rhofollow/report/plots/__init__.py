"""Report figures (matplotlib, Agg backend): each ``*_figure`` function returns a Figure.

Modules: ``common`` (palette, colour maps, the pyplot handle, site helpers), ``density`` (circular vs
independent density), ``posterior`` (the (e, omega) posterior), ``occultation`` (timing), ``rv`` (RV
curves and K), ``run`` (catalogue overview, campaign calendar). The night's schedule chart is
:mod:`rhofollow.report.schedule_chart`. Write figures with :func:`rhofollow.report.files.save_figure`.

omega is the RV-convention argument of periastron of the star: the transit happens at true anomaly
90 deg - omega, so omega = 90 deg puts the transit at periastron.
"""
from rhofollow.report.plots.common import COLOURS, ecc_cmap, evidence_cmap, highest_altitude_deg, rises_at_site
from rhofollow.report.plots.density import density_figure
from rhofollow.report.plots.posterior import ecc_omega_figure
from rhofollow.report.plots.occultation import occultation_figure, occultation_times
from rhofollow.report.plots.rv import k_summary, record_k_draws, rv_figure, rv_model_draws
from rhofollow.report.plots.run import campaign_figure, overview_figure

__all__ = ["COLOURS", "ecc_cmap", "evidence_cmap", "density_figure", "ecc_omega_figure",
           "occultation_figure", "rv_figure", "overview_figure", "campaign_figure", "rv_model_draws",
           "record_k_draws", "k_summary", "highest_altitude_deg", "rises_at_site",
           "occultation_times"]
