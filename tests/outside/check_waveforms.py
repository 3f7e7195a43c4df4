"""Outside client: Python's h5py opens the demo's waveforms.h5 and checks what
stepflux promises about the file (README, "Outputs"): a time axis, one dataset per
saved signal of the same length with a `unit` attribute, the switching-instant flags,
the cycle table, the topology-change events and the scenario echoed as an attribute.

Usage: python3 check_waveforms.py out/demo/waveforms.h5
"""
import sys

import h5py

EXPECTED_UNITS = {"time": "s", "out.v": "V", "lout.i": "A", "drain.v": "V", "mag.i": "A", "core.b": "T"}


def main(path):
    with h5py.File(path, "r") as f:
        n = f["time"].shape[0]
        assert n > 1000, f"only {n} samples"
        for name, unit in EXPECTED_UNITS.items():
            ds = f[name]
            assert ds.shape == (n,), f"{name} has shape {ds.shape}, expected ({n},)"
            got = ds.attrs["unit"]
            got = got.decode() if isinstance(got, bytes) else got
            assert got == unit, f"{name} unit {got!r}, expected {unit!r}"
        assert f["at_event"].shape == (n,)
        cycles = f["cycles"]
        m = cycles["start"].shape[0]
        assert m > 100, f"only {m} cycle records"
        for column in ["duty", "mag_current_start", "reset_end", "reset_incomplete", "drain_peak", "b_peak"]:
            assert cycles[column].shape == (m,), f"cycles/{column} shape {cycles[column].shape}"
        events = f["events"]
        k = events["time"].shape[0]
        assert k > 0 and events["before"].shape == (k,) and events["after"].shape == (k,)
        assert len(f.attrs["scenario"]) > 0
        assert len(f.attrs["topology_bits"]) > 0
        print(f"h5py: {path}: {n} samples, {m} cycles, {k} topology changes, units and shapes as promised")


if __name__ == "__main__":
    main(sys.argv[1])
