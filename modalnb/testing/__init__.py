"""Benchmark and test support: known-truth signals, Cramér–Rao bounds, the benchmark.

Nothing in the product's computation path (records, estimation, checks, exports, the
notebook widgets) imports this subpackage; it serves the test suite, ``modalnb bench``
and documentation examples:

* :mod:`modalnb.testing.synth` -- closed-form free decays of viscously damped
  single-degree-of-freedom systems (under-, critically and overdamped) and white noise
  at a stated SNR, i.e. signals whose modal parameters are known exactly;
* :mod:`modalnb.testing.crlb` -- Cramér–Rao lower bounds for damped sinusoids in white
  Gaussian noise (Kay 1993, *Fundamentals of Statistical Signal Processing: Estimation
  Theory*), the yardstick of the benchmark;
* :mod:`modalnb.testing.bench` -- ``modalnb bench``: accuracy against the bound and
  speed, against two reference methods a test engineer would write without a modal
  package.

The submodules are imported on demand (``from modalnb.testing import synth``); importing
this package imports nothing else.
"""
