"""The numeric core of qualplan: numpy/scipy only, no database, web or files.

Modules by topic (units inside the core: g, g^2/Hz, Hz, s, m, m/s):

- ``psd``: random-vibration breakpoint profiles, g rms, envelopes, simplification
- ``stats``: normal tolerance limits (P95/50) of several measured spectra
- ``signal``: PSD of measured records (Welch, maximax)
- ``sdof``: single-degree-of-freedom transfer functions and Miles' equation
- ``srs``: shock response spectra and SRS profiles
- ``synthesis``: time histories from a PSD or an SRS
- ``sine``: sine sweeps and dwells
- ``rainflow``: ASTM E1049-85 cycle counting
- ``fatigue``: fatigue damage spectra (FDS) and equivalence
- ``extreme``: extreme response spectra (ERS)
- ``equivalence``: coverage of a life by a test (FDS/ERS ratios), equivalent random
  tests, duration equivalence, time compression
- ``shock_synthesis``: wavelet shocks matching an SRS (shaker-realisable)
- ``sdof_filter``: ramp-invariant recursive filters of the SDOF oscillator
- ``modal``: modal combination (ABS, SRSS, NRL, CQC), random/sine/SRS peak responses of
  a modal summary, Davenport peak factor, Steinberg board check
"""
