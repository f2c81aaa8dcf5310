"""Bundled optical constants over the thermal range (issue 13): data where the database has them,
the documented extrapolation rules, flagged, only where it does not.

The files are exported by ``tools/export_optical_constants.py`` from the refractiveindex.info
database (trim 0.1 um - 2 cm). The ranges asserted below are those of the database entries as
exported (their headers say so); Warren & Brandt (2008) tabulate ice from the ultraviolet to the
microwave, Franta et al. (2016) silica to 125 um, Querry (1985) iron to 55.6 um.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.model.mixture import read_mixture_file
from motes.dust.model.thermal import compute_thermal, read_thermal_settings
from motes.dust.model.thermal_fast import ThermalRingModel
from motes.optics import thermal as th
from motes.optics.constants import bundled_material_names, load_material

RING = """
[star]
teff = 5800.0
luminosity = 1.0

[[materials]]
name = "ice"
source = "{source}"
extrapolation = "{rule}"

[model]
bands = ["2mass_h"]

[mixture]
fractions = {{ ice = 1.0 }}
porosity = 0.0
a_min = 5.0
a_max = 100.0
q = 3.5

[thermal]
radius_au = 80.0
bands = ["far_100"]
cross_section_au2 = 1.0
distance_pc = 10.0
sizes_per_efold = 2
flux_sizes_per_efold = 6

[bands.far_100]
shape = "top-hat"
centre_um = 100.0
width_um = 20.0
"""


def _ring(tmp_path, source="water_ice_crystalline", rule="dielectric"):
    path = tmp_path / f"ring_{source}_{rule}.toml"
    path.write_text(RING.format(source=source, rule=rule))
    desc, mix = read_mixture_file(path)
    return desc, mix, read_thermal_settings(path, desc)


@pytest.mark.parametrize("name, lo_max, hi_min", [
    ("water_ice_crystalline", 0.1, 2.0e4),     # Warren & Brandt 2008: the whole thermal grid's long side
    ("silica_amorphous", 0.1, 125.0),          # Franta et al. 2016
    ("carbon_amorphous", 0.1, 124.0),          # Hagemann et al.
    ("iron", 0.21, 55.5),                      # Querry 1985
    ("magnetite", 0.21, 55.5),                 # Querry 1985
    ("methane_ice", 0.1, 100.0),               # Martonchik & Orton 1994
    ("carbon_soot", 0.26, 55.5),               # Querry 1987
])
def test_bundled_files_keep_the_database_range(name, lo_max, hi_min):
    lo, hi = load_material(name).wavelength_range
    assert lo <= lo_max and hi >= hi_min


def test_every_bundled_material_is_listed():
    assert set(bundled_material_names()) == {"water_ice_crystalline", "silica_amorphous", "carbon_amorphous",
                                             "carbon_soot", "iron", "magnetite", "methane_ice"}


def test_ice_ring_at_100_um_uses_data_not_extrapolation(tmp_path):
    """The 100 um band of an ice ring lies inside Warren & Brandt's data: nothing there is flagged, and
    the result does not depend on the long-side rule at all (the two rules differ only beyond the data,
    which now reach past the 2 cm end of the thermal grid); the only note is the ultraviolet side."""
    desc, mix, settings = _ring(tmp_path, rule="dielectric")
    ice = desc.materials[0]
    band = settings.bands[0]
    nodes = np.linspace(band.wavelength_min, band.wavelength_max, 50)
    assert ice.covers(nodes).all() and ice.extrapolation_notes(nodes) == ()
    res = compute_thermal(desc, mix, settings)
    grid = th.thermal_wavelength_grid(extra=ice.wavelength[ice.wavelength > 2.0])
    assert ice.covers(grid[grid >= ice.wavelength_range[0]]).all()         # nothing beyond the data
    (note,) = [n for n in res.notes if "extrapolated with" in n]
    assert note == ice.extrapolation_notes(grid[grid < ice.wavelength_range[0]])[0]   # short side only
    assert f"at {grid[0]:.4g}-" in note
    # the conductor rule changes only the long side, which is never used: the same numbers exactly
    desc_c, mix_c, settings_c = _ring(tmp_path, rule="conductor")
    res_c = compute_thermal(desc_c, mix_c, settings_c)
    assert np.array_equal(res_c.band_disk, res.band_disk) and np.array_equal(res_c.temperature, res.temperature)
    # the fast path (its own, coarser grid) says the same
    fast = ThermalRingModel(desc, settings.bands, distance_pc=10.0)
    short = fast.grid[fast.grid < ice.wavelength_range[0]]
    assert [n for n in fast.notes if "extrapolated with" in n] == list(ice.extrapolation_notes(short))


def test_a_material_that_stops_short_is_still_flagged(tmp_path):
    """Iron's data stop at 55.6 um: the thermal grid beyond is Hagen-Rubens, and the exact and fast
    outputs both say so, with the covered range."""
    desc, mix, settings = _ring(tmp_path, source="iron", rule="conductor")
    res = compute_thermal(desc, mix, settings)
    notes = [n for n in res.notes if "extrapolated with the 'conductor' rule" in n]
    assert len(notes) == 1 and "Hagen-Rubens" in notes[0] and "data cover 0.21-55.56 um" in notes[0]
    assert f"-{2.0e4:.4g} um" in notes[0]
    fast = ThermalRingModel(desc, settings.bands, distance_pc=10.0)
    assert notes[0] in fast.notes
