"""resonance: screening studies for power-factor-correction capacitor banks.

Frequency scans of every bank step, harmonic penetration, capacitor duty and
distortion limits, detuning proposals and a submittal report, from one case file.

Importing this package is cheap: pandapower and matplotlib are imported only
by the modules that need them (``model/``, ``report/``).  The entry for Python users is
``resonance.run_check`` (:func:`resonance.pipeline.run_check`, docs/python-api.md).
"""

__version__ = "0.1.0"

__all__ = ["__version__", "run_check", "batch", "load_case", "run_study", "InputError", "ResonanceError"]


def __getattr__(name):  # lazy re-exports keep `resonance --help` fast
    if name == "run_check":
        from resonance.pipeline import run_check

        return run_check
    if name == "batch":
        from resonance.batch_run import batch

        return batch
    if name == "load_case":
        from resonance.inputs.case_load import load_case

        return load_case
    if name == "run_study":
        from resonance.assessment.study import run_study

        return run_study
    if name in ("InputError", "ResonanceError"):
        from resonance import errors

        return getattr(errors, name)
    raise AttributeError(name)
