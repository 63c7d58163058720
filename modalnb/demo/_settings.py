"""Everything the demo generator uses, in one frozen dataclass (also written to the truth)."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

#: Seed of the shipped campaign.
DEMO_SEED = 20240611

SCENARIO_NAME = "Heron sensor boom, bench tap test"
CAMPAIGN_FILE = "demo_campaign.nc"
TRUTH_FILE = "demo_truth.json"
CSV_FILE = "demo_hit1.csv"


@dataclass(frozen=True)
class DemoSettings:
    """Settings of the demo campaign: the beam, the sensors, the hits, noise and ADC.

    The field order is the order of ``truth["generator"]["settings"]``.

    Attributes
    ----------
    length_m, width_m, thickness_m : float
        The steel flat bar (bending about the width axis).
    youngs_modulus_pa, density_kg_m3 : float
        Steel: 200 GPa is a common textbook round value (EN 1993-1-1, 3.2.6, takes
        210 GPa for design) and 7850 kg/m^3 the usual density (EN 1991-1-1, Annex A);
        both from memory.
    n_elements : int
        Equal beam elements of the finite-element model.
    sample_rate_hz, n_samples, n_pretrigger : float, int, int
        Acquisition; ``time`` starts at ``-n_pretrigger / sample_rate_hz``.
    max_mode_fraction_of_fs : float
        Modes at or above this fraction of fs are left out (ideal anti-alias filter).
    damping_ratios : tuple of float
        One per kept mode.
    sensor_nodes, sensor_directions : tuple
        Accelerometer nodes and mounting directions (``"-Z"``: upside down).
    excitation_node, excitation_direction : int, str
        Where and which way the hammer strikes.
    n_hits, double_hit, clipped_hit : int
        Number of hits; the (1-based) hit that bounces and the one that overloads.
    peak_force_range_n, nominal_peak_force_n, nominal_duration_s, duration_jitter_rel : ...
        Hammer pulses: peak force drawn uniformly in the range; duration scaled with
        ``peak^(-1/6)`` from the nominal pulse, times ``1 + jitter * N(0, 1)``.
    start_range_s : tuple of float
        Pulse start, drawn uniformly.
    double_hit_delay_range_s, double_hit_ratio_range : tuple of float
        Delay and peak ratio of the bounce, drawn uniformly.
    clip_overdrive : float
        The clipped hit's noise-free peak over the accelerometer full scale.
    response_snr_db, force_snr_db : float
        Noise floors (see :func:`modalnb.demo.make_demo_campaign`).
    full_scale_m_s2, force_full_scale_n, adc_bits : float, float, int
        The ADC.

    Examples
    --------
    >>> DemoSettings().n_hits
    8
    """

    length_m: float = 0.5
    width_m: float = 0.03
    thickness_m: float = 0.01
    youngs_modulus_pa: float = 200e9
    density_kg_m3: float = 7850.0
    n_elements: int = 40
    sample_rate_hz: float = 4096.0
    n_samples: int = 8192
    n_pretrigger: int = 205
    max_mode_fraction_of_fs: float = 0.4
    damping_ratios: tuple[float, ...] = (0.015, 0.009, 0.007, 0.006)
    sensor_nodes: tuple[int, ...] = (11, 17, 23, 29, 37, 40)
    sensor_directions: tuple[str, ...] = ("+Z", "+Z", "-Z", "+Z", "+Z", "+Z")
    excitation_node: int = 40
    excitation_direction: str = "+Z"
    n_hits: int = 8
    double_hit: int = 4
    clipped_hit: int = 6
    peak_force_range_n: tuple[float, float] = (60.0, 160.0)
    nominal_peak_force_n: float = 120.0
    nominal_duration_s: float = 0.7e-3
    duration_jitter_rel: float = 0.03
    start_range_s: tuple[float, float] = (-0.15e-3, 0.0)
    double_hit_delay_range_s: tuple[float, float] = (3.0e-3, 4.5e-3)
    double_hit_ratio_range: tuple[float, float] = (0.3, 0.4)
    clip_overdrive: float = 1.3
    response_snr_db: float = 40.0
    force_snr_db: float = 50.0
    full_scale_m_s2: float = 2000.0
    force_full_scale_n: float = 1000.0
    adc_bits: int = 24

    def as_json(self) -> dict[str, Any]:
        """The settings as a JSON-safe dict (tuples become lists).

        Examples
        --------
        >>> DemoSettings().as_json()["sensor_nodes"]
        [11, 17, 23, 29, 37, 40]
        """
        return {k: list(v) if isinstance(v, tuple) else v for k, v in asdict(self).items()}


#: The settings of the shipped campaign.
DEMO_SETTINGS = DemoSettings()
