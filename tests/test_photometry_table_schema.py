"""Companion and disk photometry tables share one vocabulary of kinds (motes.photometry.table_schema)."""

from __future__ import annotations

from pathlib import Path

import pytest

from motes.dust.observations import DISK_PHOTOMETRY_KINDS, read_disk_photometry
from motes.errors import InputError
from motes.photometry import INPUT_KINDS, read_photometry_table
from motes.photometry.table_schema import COMPANION_KINDS, DISK_KINDS, KINDS, RENAMED_KINDS

DATA = Path(__file__).resolve().parents[1] / "src" / "motes" / "demo" / "data"


def test_both_readers_take_their_kinds_from_the_schema():
    assert INPUT_KINDS == COMPANION_KINDS and DISK_PHOTOMETRY_KINDS == DISK_KINDS
    assert set(COMPANION_KINDS) | set(DISK_KINDS) == set(KINDS)
    # the quantities both tables measure have one name
    assert {"contrast_mag", "contrast_ratio"} <= set(COMPANION_KINDS) & set(DISK_KINDS)
    assert set(RENAMED_KINDS.values()) <= set(DISK_KINDS) and not set(RENAMED_KINDS) & set(KINDS)


@pytest.mark.parametrize("old, new", sorted(RENAMED_KINDS.items()))
def test_old_disk_names_are_refused_in_both_tables_with_the_new_name(tmp_path, old, new):
    disk = tmp_path / "disk.csv"
    disk.write_text(f"band,value,error,kind\n2mass_j,10.0,0.03,{old}\n")
    with pytest.raises(InputError, match=f"disk.csv, row 1 .*kind '{old}' is now called '{new}'"):
        read_disk_photometry(disk)
    if new in COMPANION_KINDS:
        comp = tmp_path / "companion.csv"
        comp.write_text(f"band,kind,value,error\n2mass_j,{old},10.0,0.03\n")
        with pytest.raises(InputError, match=f"companion.csv, row 1 .*now called '{new}'"):
            read_photometry_table(comp)


def test_a_kind_of_the_other_table_is_refused_saying_what_it_means(tmp_path):
    comp = tmp_path / "companion.csv"
    comp.write_text("band,kind,value,error\n2mass_j,sb_contrast_mag,10.0,0.03\n")
    with pytest.raises(InputError, match=r"'sb_contrast_mag' \(μ_object − m_star .*not accepted in this table; "
                                         r"allowed: vega_mag, ab_mag, flux, contrast_mag, contrast_ratio"):
        read_photometry_table(comp)


def test_table_meta_kind_is_checked_too(tmp_path):
    from astropy.table import Table

    t = Table({"band": ["2mass_j"], "value": [10.0], "error": [0.03]}, meta={"kind": "delta_mag"})
    t.write(tmp_path / "disk.ecsv", format="ascii.ecsv")
    with pytest.raises(InputError, match="meta 'kind': kind 'delta_mag' is now called 'contrast_mag'"):
        read_disk_photometry(tmp_path / "disk.ecsv")
    t.meta["kind"] = "contrast_mag"
    t.write(tmp_path / "disk.ecsv", format="ascii.ecsv", overwrite=True)
    obs = read_disk_photometry(tmp_path / "disk.ecsv")
    assert obs.input_kind == ("contrast_mag",)
    assert obs.value[0] == pytest.approx(10 ** (-0.4 * 10.0), rel=1e-12)


def test_demo_tables_use_the_one_vocabulary():
    from motes.dust.model.description import read_model_description

    custom = read_model_description(DATA / "disk_fit.toml").custom_bands
    disk = read_disk_photometry(DATA / "disk_photometry.ecsv", custom_bands=custom)
    assert set(disk.input_kind) == {"contrast_ratio", "contrast_mag"}
    from astropy.table import Table

    companion = set(Table.read(DATA / "companion_photometry.ecsv", format="ascii.ecsv")["kind"])
    assert "contrast_mag" in companion and companion <= set(COMPANION_KINDS)
