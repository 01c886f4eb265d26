"""Reading scan files of earlier schema versions.

Each step renames what changed between two consecutive schema versions; ``open_scan``
applies the steps in order and says which conversion it made, so a file written by an
earlier interkit still redraws every plot and widget without recomputation.
"""

from __future__ import annotations

import json

import xarray as xr

#: schema 1 -> 2: SAPT0 term variables named after their perturbation order
SAPT_RENAMES_1_TO_2 = {
    "sapt_elst10": "sapt_e10_elst",
    "sapt_exch10": "sapt_e10_exch",
    "sapt_exch10_s2": "sapt_e10_exch_s2",
    "sapt_ind20r": "sapt_e20_ind_resp",
    "sapt_ind20r_ab": "sapt_e20_ind_resp_a",
    "sapt_ind20r_ba": "sapt_e20_ind_resp_b",
    "sapt_exch_ind20r": "sapt_e20_exind_resp",
    "sapt_disp20": "sapt_e20_disp",
    "sapt_exch_disp20": "sapt_e20_exdisp",
    "sapt_dhf": "sapt_delta_hf",
}


#: schema 1 -> 2: the spec's SCF threshold has a name of our own
SPEC_RENAMES_1_TO_2 = {"conv_tol": "scf_threshold_hartree"}
#: schema 1 -> 2: the label note of a level without SCF density fitting
LABEL_NOTES_1_TO_2 = {"(no-ri)": "(exact scf)"}


def _one_to_two(ds: xr.Dataset) -> xr.Dataset:
    present = {old: new for old, new in SAPT_RENAMES_1_TO_2.items() if old in ds.variables}
    ds = ds.rename(present) if present else ds
    if "spec_json" in ds.attrs:
        try:
            spec = json.loads(ds.attrs["spec_json"])
        except ValueError:
            spec = None  # validate() names the problem
        if isinstance(spec, dict):
            for old, new in SPEC_RENAMES_1_TO_2.items():
                if old in spec:
                    spec[new] = spec.pop(old)
            ds.attrs["spec_json"] = json.dumps(spec)
    if "level" in ds.coords:
        labels = [str(x) for x in ds["level"].values]
        for old, new in LABEL_NOTES_1_TO_2.items():
            labels = [lab.replace(old, new) for lab in labels]
        ds = ds.assign_coords(level=xr.DataArray(labels, dims="level", attrs=ds["level"].attrs))
    return ds


#: schema version -> (next version, conversion)
STEPS = {"interkit-scan/1": ("interkit-scan/2", _one_to_two)}


def upgrade(ds: xr.Dataset, current: str) -> tuple[xr.Dataset, str | None]:
    """Convert ``ds`` step by step to the ``current`` schema.

    Returns
    -------
    ds : xarray.Dataset
        The converted Dataset (``ds`` itself when it already has the current schema or
        an unknown one; :func:`interkit.data.schema.validate` judges the result).
    note : str or None
        ``'converted from schema X to Y'`` when a conversion happened.
    """
    start = ds.attrs.get("schema")
    version = start
    while version != current and version in STEPS:
        version, step = STEPS[version]
        ds = step(ds)
        ds.attrs["schema"] = version
    if version == start:
        return ds, None
    ds.attrs["converted_from_schema"] = str(start)
    return ds, f"converted from schema {start} to {version}"
