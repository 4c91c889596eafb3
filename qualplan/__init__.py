"""qualplan: qualification planning for dynamic environments.

Random vibration (PSD), sine sweeps, mechanical shock (SRS) and measured time
histories: stored with their revisions, enveloped into test and analysis levels,
compared through the fatigue damage spectrum (FDS) and the extreme response
spectrum (ERS), issued as test-level documents and traced to requirements.
"""

__version__ = "0.1.0"
