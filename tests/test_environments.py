"""Checks of nanoabs.environments: validation, metadata, field factors against textbook optics."""

import numpy as np
import pytest

from nanoabs._errors import NanoabsError
from nanoabs.environments import buried, homogeneous, on_substrate


def test_field_factor_on_silicon_front_is_the_standing_wave():
    # Normal incidence from air on a half-space: |1 + r exp(2ikz)|^2, r = (1 - n)/(1 + n)
    # (Born & Wolf 1999, eq. 1.5.20 at normal incidence, from memory); n from the store's
    # own Si table; tolerance 1e-12.
    from nanoabs import material

    wl = np.array([500.0, 700.0, 1000.0])
    env = on_substrate("Si", gap_nm=2.0)
    n = material("Si").refractive_index(wl)
    r = (1 - n) / (1 + n)
    z = 2.0 + 20.0
    ref = np.abs(1 + r * np.exp(2j * 2 * np.pi / wl * z)) ** 2
    np.testing.assert_allclose(env.field_factor(wl, 20.0), ref, rtol=1e-12)


def test_back_incidence_and_buried_use_transmission():
    # Through a non-absorbing substrate (SiO2, lit from the back) the particle in air sees
    # |t|^2 = (2 n / (1 + n))^2 for E (Born & Wolf 1999, eq. 1.5.20); buried particle lit from the
    # front sees (2/(1 + n))^2 attenuated by nothing (lossless); tolerance 1e-12.
    from nanoabs import material

    wl = np.array([600.0, 900.0])
    n = material("SiO2").refractive_index(wl).real
    env = on_substrate("SiO2", gap_nm=0.0, incidence="back")
    np.testing.assert_allclose(env.field_factor(wl, 10.0), (2 * n / (1 + n)) ** 2, rtol=1e-12)
    env_b = buried("SiO2", depth_nm=50.0)
    np.testing.assert_allclose(env_b.field_factor(wl, 10.0), (2 / (1 + n)) ** 2, rtol=1e-12)
    res = env_b.resolve(wl)
    np.testing.assert_allclose(res.n_host, n)
    np.testing.assert_allclose(res.n_inc, 1.0)


@pytest.mark.parametrize("call, word", [
    (lambda: on_substrate("Si", gap_nm=-1), "gap_nm"),
    (lambda: on_substrate("Si", incidence="side"), "incidence"),
    (lambda: on_substrate("Si", angle_deg=95), "angle_deg"),
    (lambda: on_substrate("Si", polarization="q"), "polarization"),
    (lambda: on_substrate("Si", spacer="SiO2:-3"), "spacer thickness"),
    (lambda: on_substrate("Si", spacer=("SiO2",)), "spacer"),
    (lambda: on_substrate("Unobtainium"), "Unobtainium"),
    (lambda: buried("Si", depth_nm=0), "depth_nm"),
    (lambda: buried("Si", depth_nm=10).center_height_nm(20.0), "depth_nm"),
])
def test_bad_input_one_line_error_naming_the_parameter(call, word):
    with pytest.raises(NanoabsError) as e:
        call()
    assert word in str(e.value) and "\n" not in str(e.value)


def test_absorbing_host_or_incidence_medium_rejected():
    # Si absorbs strongly at 500 nm (k ~ 0.07 > 0.01 n): neither host (buried) nor the
    # incidence medium (back) there; fine at 1300 nm where it is transparent (common practice).
    with pytest.raises(NanoabsError, match="substrate"):
        buried("Si", depth_nm=60).resolve(np.array([500.0]))
    with pytest.raises(NanoabsError, match="substrate"):
        on_substrate("Si", incidence="back").resolve(np.array([500.0]))
    res = on_substrate("Si", incidence="back", spacer="SiO2:3").resolve(np.array([1300.0]))
    assert res.n_inc[0] > 3.4 and res.n_host[0] == 1.0
    assert len(res.light_stack) == 3 and res.light_thickness_nm == [3.0]


def test_describe_states_reference_and_geometry():
    d = on_substrate("Si", gap_nm=1, spacer="SiO2:3", incidence="back").describe()
    assert d["kind"] == "on_substrate" and d["spacer"]["thickness_nm"] == 3.0
    assert "incidence medium" in d["sigma_reference"] and d["incidence"] == "back"
    assert buried("Si", depth_nm=60).describe()["depth_nm"] == 60.0
    assert homogeneous("water").describe()["kind"] == "homogeneous"


def test_spectrum_with_index_matched_substrate_equals_homogeneous_mie():
    # Recipe check (contributor guide, "How to add an environment"): substrate = superstrate = 1.33
    # through nanoabs.spectrum must give the homogeneous Mie result of spectrum(medium=1.33);
    # tolerance 1e-8 (issue requirement).
    import nanoabs

    wl = np.linspace(450.0, 750.0, 7)
    sp = nanoabs.Sphere("Au", 30.0)
    ref = nanoabs.spectrum(sp, wl, medium=1.33)
    s = nanoabs.spectrum(sp, wl, environment=on_substrate(1.33, superstrate=1.33, gap_nm=2.0))
    np.testing.assert_allclose(s.sigma_abs_m2, ref.sigma_abs_m2, rtol=1e-8)
    np.testing.assert_allclose(s.sigma_ext_m2, ref.sigma_ext_m2, rtol=1e-8)
    assert s.metadata["method"] == "mie" and "multipole" in s.metadata["environment_method"]
    assert s.metadata["multipole_converged"] and "incidence medium" in s.metadata["sigma_reference"]
    np.testing.assert_allclose(s.metadata["field_factor"], 1.0, rtol=1e-12)


def test_spectrum_dipole_methods_on_substrate_and_rod_orientations():
    # Corrected dipole (Sommerfeld) and static dipole (image) both accept a substrate (by name: "auto"
    # tries the T-matrix multipole method first, tests/test_surface_tmatrix.py); a gold rod
    # lying flat on glass lit from the front: "random" in-plane orientation is the mean of "long"
    # and "short" (exact for an in-plane isotropic reflected field, see environments._lab_tensors);
    # tolerance 1e-12.
    import nanoabs

    wl = np.linspace(600.0, 1000.0, 5)
    rod = nanoabs.spheroid("Au", length_nm=60.0, diameter_nm=20.0)
    env = on_substrate("SiO2", gap_nm=1.0)
    long_ = nanoabs.spectrum(rod, wl, environment=env, polarization="long", method="mlwa").sigma_abs_m2
    short = nanoabs.spectrum(rod, wl, environment=env, polarization="short", method="mlwa").sigma_abs_m2
    rnd = nanoabs.spectrum(rod, wl, environment=env, polarization="random", method="mlwa")
    np.testing.assert_allclose(rnd.sigma_abs_m2, 0.5 * (long_ + short), rtol=1e-12)
    assert rnd.metadata["method"] == "mlwa" and np.all(long_ > short)
    qs = nanoabs.spectrum(rod, wl, environment=env, polarization="long", method="quasistatic")
    assert "image" in qs.metadata["environment_method"] and np.all(qs.sigma_abs_m2 > 0)


def test_dipole_method_cautions_for_a_sphere_closer_than_its_radius():
    # Source: bench/substrate.md (the multipole method vs the dipole method, itself held to miepython
    # and the energy balance): for a 40 nm Au sphere 1 nm above Si the dipole's peak sigma_abs is ~25 %
    # off. A gap below the radius gets the caution, a gap above it does not; the multipole method
    # never does.
    import warnings

    import nanoabs

    wl = np.array([520.0, 560.0])
    sph = nanoabs.Sphere("Au", 40.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        near = nanoabs.spectrum(sph, wl, environment=on_substrate("Si", gap_nm=1.0), method="mlwa")
        far = nanoabs.spectrum(sph, wl, environment=on_substrate("Si", gap_nm=45.0), method="mlwa")
        exact = nanoabs.spectrum(sph, wl, environment=on_substrate("Si", gap_nm=1.0))
    codes = lambda s: [c["code"] for c in s.metadata["cautions"]]  # noqa: E731
    assert "dipole-near-surface" in codes(near)
    assert "dipole-near-surface" not in codes(far) and "dipole-near-surface" not in codes(exact)
    assert abs(near.sigma_abs_m2[0] / exact.sigma_abs_m2[0] - 1) > 0.05  # the error the caution names


def test_array_of_sizes_refused_on_substrate():
    import nanoabs

    with pytest.raises(NanoabsError, match="one size per call"):
        nanoabs.spectrum(nanoabs.Sphere("Au", np.array([[10.0], [20.0]])), np.array([500.0, 600.0]),
                         environment=on_substrate("Si"))


def test_bare_stack_reflectance_and_sparse_layer():
    # Air/Si at normal incidence: R = |(1 - n)/(1 + n)|^2 (Born & Wolf 1999, eq. 1.5.20) ~ 0.3 in
    # the near infrared; the sparse layer absorptance is N sigma (definition); tolerance 1e-12.
    from nanoabs import material
    from nanoabs.environments import sparse_layer_absorptance

    wl = np.array([1300.0])
    n = material("Si").refractive_index(wl)
    R, T = on_substrate("Si").bare_RT(wl)
    np.testing.assert_allclose(R, np.abs((1 - n) / (1 + n)) ** 2, rtol=1e-12)
    np.testing.assert_allclose(R + T, 1.0, rtol=1e-12)
    A, sparse = sparse_layer_absorptance(np.array([5000.0]), 5.0)
    np.testing.assert_allclose(A, 5.0 * 1e-6 * 5000.0, rtol=1e-12)
    assert sparse
    assert not sparse_layer_absorptance(np.array([5000.0]), 100.0, sigma_ext_nm2=np.array([3e4]))[1]


def test_touching_sphere_warns_when_the_order_cap_is_reached():
    # A sphere touching Si (gap 0): its image touches it too, the multipole series converges
    # only algebraically (Bobbert & Vlieger 1986, Sec. 5, from memory), so the order cap is
    # reached and a caution is issued and recorded.
    import nanoabs
    from nanoabs.validity import NanoabsWarning

    with pytest.warns(NanoabsWarning, match="multipole order"):
        s = nanoabs.spectrum(nanoabs.Sphere("Ag", 40.0), np.array([370.0]), environment=on_substrate("Si"))
    assert not s.metadata["multipole_converged"]
    assert "multipole-order" in [c["code"] for c in s.metadata["cautions"]]
