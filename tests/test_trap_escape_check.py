"""physics.shallow-trap judges a crossed trap by its lowest way out: a strong guide crossed by a weak dimple
holds the atoms only as deep as the dimple's own potential, and the finding says they escape along the guide.

Closed form: U0 = Re(alpha) I0 / (2 eps0 c), I0 = 2P/(pi w^2) (Adv. At. Mol. Opt. Phys. 42, 95 (2000)); the
polarisability alpha is the model's input (tested against published values in tests/physics/test_optical.py).
"""

import re

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.physics.atoms import get_species
from seqgen.physics.optical import GaussianBeam, effective_depth_with_gravity, scalar_polarizability_au

from .conftest import SEQUENCES
from .test_faults import check

AU_POL = 4 * np.pi * sc.epsilon_0 * sc.physical_constants["Bohr radius"][0] ** 3


def test_guide_and_weak_dimple_report_the_dimple_depth_and_the_way_out():
    exit_code, found, _ = check(SEQUENCES / "faults" / "crossed_trap_saddle.yaml")
    shallow = [f for f in found if f.code == "physics.shallow-trap"]
    assert len(shallow) == 1
    msg = shallow[0].message
    assert "the atoms escape along 'guide' (x)" in msg
    # the file's numbers: dimple 50 mW, 42 um waist, 1064 nm; sample 1 uK
    alpha = scalar_polarizability_au(get_species("Rb87"), 1064e-9) * AU_POL
    u_dimple = alpha * 2 * 0.05 / (np.pi * 42e-6**2) / (2 * sc.epsilon_0 * sc.c)
    eta = float(re.search(r"only ([0-9.]+) k_B T deep", msg).group(1))
    # gravity sags the atoms about a micrometre below the dimple's axis: its U0 to 1 %
    assert eta == pytest.approx(u_dimple / (sc.k * 1e-6), rel=0.01)
    assert eta < 5  # the default limits.min_eta
    # the barrier straight down through the crossing (guide plus dimple) would have passed it
    beams = (GaussianBeam(1.1, 55e-6, 1064e-9, direction=(1, 0, 0)), GaussianBeam(0.05, 42e-6, 1064e-9, direction=(0, 1, 0)))
    assert effective_depth_with_gravity(get_species("Rb87"), beams) / (sc.k * 1e-6) > 20
