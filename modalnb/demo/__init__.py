"""Demo campaign: tap test of the "Heron" sensor boom, a scenario of our own.

The structure
-------------
A slender steel flat bar, 500 mm long, 30 mm wide and 10 mm thick, is bolted at one end
to a rigid test frame and sticks out horizontally: an instrument boom with its sensor
removed for the test. Its root is modelled as clamped, its tip as free. Vertical bending
(the 10 mm direction, global Z) is modelled with Euler-Bernoulli beam finite elements:
Hermite cubic elements with the consistent mass matrix (Przemieniecki 1968, *Theory of
Matrix Structural Analysis*, ch. 11; Petyt 1990, *Introduction to Finite Element
Vibration Analysis*, ch. 3; both from memory). As the mesh is refined the natural
frequencies converge from above to the handbook cantilever values
``f_n = (beta_n L)^2 / (2 pi L^2) sqrt(E I / (rho A))`` with ``beta_n L`` = 1.87510407,
4.69409113, 7.85475744, 10.99554073 (Blevins 1979, *Formulas for Natural Frequency and
Mode Shape*, table 8-1; roots of ``cos x cosh x = -1``). The boom has four bending modes
between 10 and 1200 Hz (about 32.6, 204.4, 572.3 and 1121.5 Hz).

The test
--------
Six accelerometers (channels ``boom-1`` .. ``boom-6``) sit on the top face along the
boom; ``boom-3`` is mounted upside down on the bottom face, so its direction is ``-Z``
and it records the negative of the +Z motion. An instrumented hammer strikes the
underside of the tip upwards (+Z) at node ``n40``, right under ``boom-6`` (a driving
point). Eight hits are recorded at 4096 Hz, 8192 samples each (2 s) with 205 pre-trigger
samples, so ``time`` starts at -0.05 s. Hit 4 is a double hit (the hammer bounced back
onto the boom a few ms later) and hit 6 was struck so hard that the driving-point
channel saturates at the ADC full scale; both are recorded in the truth with the reason.

The physics we control
----------------------
* Modal superposition of the FE modes with mass-normalised shapes ``phi_k``; each modal
  coordinate obeys ``q'' + 2 zeta w q' + w^2 q = phi_k(p) f(t)`` (classical, i.e. modal,
  damping; ratios 1.5, 0.9, 0.7 and 0.6 %, typical of a bolted steel assembly at tap-test
  levels, compare the bolted-steel log decrements of EN 1991-1-4 Annex F).
* The force is a sum of half-sine pulses (a common model of a hammer impact; contact
  duration scaled with peak force as ``F^(-1/6)``, the Hertz-contact trend, Johnson 1985,
  *Contact Mechanics*, ch. 11, from memory). Each modal response to the continuous
  half-sine is computed in closed form (convolution with the modal impulse response), so
  there is no time-stepping error; :func:`sdof_half_sine_response` is that solution.
* Only modes below 0.4 fs are included: the acquisition is taken to have an ideal
  anti-alias filter (the fifth mode, about 1854 Hz, is left out). The force record is
  the continuous pulse sampled as is.
* Noise: independent Gaussian noise, the same floor on every accelerometer (40 dB below
  the RMS over all channels of a nominal 120 N hit) and on the force (50 dB below a
  120 N peak, so that a 5 % double-hit threshold stays well above the floor); then the
  ADC: values clipped to +-full scale and quantised to 24 bits.

This is invented data for demonstrations and tests only.

Where the code is
-----------------
* :mod:`modalnb.demo._model` -- the physical model: FE cantilever, its modes, the hammer
  pulse and the exact modal response;
* :mod:`modalnb.demo._campaign` -- the campaign writer: hits, noise, double hit,
  clipping, ADC, the record set and the truth;
* :mod:`modalnb.demo._store` -- the files (write, load) and the command line;
* :mod:`modalnb.demo._settings` -- :class:`DemoSettings`, every number the generator uses;
* :mod:`modalnb.demo._frame` -- the roving-hammer demo (a welded portal frame of
  Euler-Bernoulli frame elements, 75 hits over 25 nodes, two fixed accelerometers; its
  ``scipy.linalg.eigh`` truth): :func:`roving_campaign`, :func:`write_roving_demo`.

Reproducibility
---------------
The shipped files regenerate to the last bit: the noise comes from
``numpy.random.default_rng(DEMO_SEED)`` and the FE modes from a bit-reproducible solver
(:func:`cantilever_modes`). Modes from LAPACK alone differ between builds by about 1e-9
(relative), enough to move a few hundred of the 24-bit ADC codes by one step.

Truth conventions
-----------------
* ``frequency_hz`` is the undamped natural frequency of the FE model, ``damped_frequency_hz``
  is ``f sqrt(1 - zeta^2)``; ``handbook_frequency_hz`` is the continuous beam value.
* ``amplitude``/``phase_deg`` (one entry per channel) are the global (+Z) mode shape at
  the sensors, sensor direction sign removed, scaled so that the largest-amplitude
  channel has amplitude 1 and phase 0 (phases are therefore 0 or 180).
* Residues: for a unit impulse of force at ``t = 0`` the +Z displacement of sensor ``c``
  is ``sum_k phi_kc phi_kp exp(-sigma_k t) sin(wd_k t) / wd_k`` (Ewins 2000, *Modal
  Testing: Theory, Practice and Application*, 2nd ed., ch. 2, from memory). Writing
  ``sin(wd t) / wd = 2 Re(e^{lambda t} / (2 j wd))`` with ``lambda = -sigma + j wd``
  and differentiating twice, the acceleration
  for ``t > 0`` is ``sum_k 2 Re(R_kc e^{lambda_k t})`` with
  ``R_kc = phi_kc phi_kp lambda_k^2 / (2 j wd_k)`` (m/s^2 per N s). ``residue_real`` /
  ``residue_imag`` are ``R_kc`` in the global +Z frame; ``residue_*_recorded`` carry the
  sensor sign (what the channel itself records). The test suite checks this formula
  against a numerical ODE solution.
"""

from ._campaign import DemoRun, demo_truth, make_demo_campaign, time_axis
from ._frame import (
    FRAME_SETTINGS,
    ROVING_FILES,
    ROVING_SEED,
    FrameModel,
    FrameSettings,
    beam_line_model,
    frame_element,
    frame_model,
    roving_campaign,
    write_roving_demo,
)
from ._model import (
    HANDBOOK_CANTILEVER_BETA_L,
    BoomModel,
    CantileverModes,
    HalfSinePulse,
    boom_model,
    cantilever_modes,
    half_sine_force,
    handbook_cantilever_frequencies,
    sdof_half_sine_response,
)
from ._production import bracket_model, lumped_model, lumped_records, production_campaign
from ._settings import (
    CAMPAIGN_FILE,
    CSV_FILE,
    DEMO_SEED,
    DEMO_SETTINGS,
    SCENARIO_NAME,
    TRUTH_FILE,
    DemoSettings,
)
from ._store import load_demo, load_demo_truth, main, write_demo

__all__ = [
    "DEMO_SEED",
    "DEMO_SETTINGS",
    "DemoSettings",
    "HANDBOOK_CANTILEVER_BETA_L",
    "SCENARIO_NAME",
    "CAMPAIGN_FILE",
    "TRUTH_FILE",
    "CSV_FILE",
    "HalfSinePulse",
    "CantileverModes",
    "BoomModel",
    "DemoRun",
    "cantilever_modes",
    "handbook_cantilever_frequencies",
    "half_sine_force",
    "sdof_half_sine_response",
    "boom_model",
    "time_axis",
    "make_demo_campaign",
    "demo_truth",
    "load_demo",
    "load_demo_truth",
    "write_demo",
    "main",
    "production_campaign",
    "bracket_model",
    "lumped_model",
    "lumped_records",
    "FrameSettings",
    "FRAME_SETTINGS",
    "FrameModel",
    "frame_model",
    "frame_element",
    "beam_line_model",
    "roving_campaign",
    "write_roving_demo",
    "ROVING_SEED",
    "ROVING_FILES",
]
