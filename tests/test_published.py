"""Published steady-state benchmark: Blankenbach et al. (1989), Geophys. J. Int. 98, 23-38,
table of best estimates (values quoted from memory).  Unit square, free-slip walls, T = 1 at the
bottom and 0 at the top, insulating sides."""


from convsim import api

# case: (Nu, vrms, q1, q2)
PUBLISHED = {
    "1a": (4.884409, 42.864947, 8.059384, 0.588810),
    "2a": (10.0660, 480.4334, 17.53136, 1.00851),
}


def _run(case_config, case, n):
    return api.run(case_config(case, f"domain.nx={n}", f"domain.nz={n}"))


def test_case_1a_converges_to_the_published_values(case_config):
    nu, vrms, q1, q2 = PUBLISHED["1a"]
    coarse, fine = _run(case_config, "1a", 32), _run(case_config, "1a", 64)
    assert coarse.steady and fine.steady
    for r in (coarse, fine):                    # Nu at top and bottom agree at steady state
        assert abs(r.nusselt_top - r.nusselt_bottom) < 1e-6 * r.nusselt_top
    errors = [abs(r.nusselt_top / nu - 1) for r in (coarse, fine)]
    assert errors[1] < errors[0] and errors[1] < 5e-4
    assert abs(fine.vrms / vrms - 1) < 5e-4
    assert abs(fine.corner_gradients[0] / q1 - 1) < 1e-3
    assert abs(fine.corner_gradients[1] / q2 - 1) < 2e-3
    # second-order Richardson extrapolation from the two grids
    nu_ext = fine.nusselt_top + (fine.nusselt_top - coarse.nusselt_top) / 3.0
    vrms_ext = fine.vrms + (fine.vrms - coarse.vrms) / 3.0
    assert abs(nu_ext / nu - 1) < 2e-4
    assert abs(vrms_ext / vrms - 1) < 2e-4


def test_case_2a_temperature_dependent_viscosity(case_config):
    nu, vrms, q1, q2 = PUBLISHED["2a"]
    coarse, fine = _run(case_config, "2a", 32), _run(case_config, "2a", 64)
    assert coarse.steady and fine.steady
    errors = [abs(r.nusselt_top / nu - 1) for r in (coarse, fine)]
    assert errors[1] < errors[0] / 2.5            # about second order
    assert errors[1] < 0.03
    assert abs(fine.vrms / vrms - 1) < 5e-3
    assert abs(fine.corner_gradients[0] / q1 - 1) < 0.07
    assert abs(fine.corner_gradients[1] / q2 - 1) < 0.05       # 0.9 % at 128 x 128 (bench)
    # viscosity contrast across the box is the law's 1000 (cells sit half a cell from the walls)
    assert 300 < fine.viscosity.max() / fine.viscosity.min() < 1000
