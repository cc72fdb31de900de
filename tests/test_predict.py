"""Tests of envpredict.predict, the old module name kept as a shim over mapping and sweep
(the tests of the functions themselves are in test_mapping.py and test_sweep.py)."""

from __future__ import annotations


def test_old_module_name_still_works():
    import envpredict
    import envpredict.mapping
    import envpredict.predict
    import envpredict.sweep

    assert envpredict.predict.fit_mapping is envpredict.mapping.fit_mapping
    assert envpredict.predict.snr_sweep is envpredict.sweep.snr_sweep
    assert envpredict.fit_mapping is envpredict.mapping.fit_mapping
    assert envpredict.snr_sweep_files is envpredict.sweep.snr_sweep_files
