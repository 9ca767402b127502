"""Finding codes of the `physics.*` family: what the shot does to the atoms.

Each code is a value: rules report it by reference, so a misspelt name fails at import.
"""

from ._code import Code

# sources several codes share
_PASSAGE = ("uniform acceleration during the push, then free flight (textbook); Thomas-Fermi radius "
            "and profile (Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge University "
            "Press (2008)); thermal width sqrt(k_B T / (m omega^2)) by equipartition (textbook); the "
            "rig file's barrier position and waist")
_DRIVE = ("modulated-beam Raman coupling via the vector light shift, Adv. At. Mol. Opt. Phys. 42, 95 "
          "(2000); two-component scattering and Larmor clock, Sov. J. Nucl. Phys. 4, 182 (1967), Phys."
          " Rev. B 27, 6178 (1983); Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)")
_STERN_GERLACH = ("Stern-Gerlach separation: relative acceleration (mu_1 - mu_2) b'/m with moments "
                  "from the Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)")
_PROBE = ("steady-state scattering rate and saturation intensity, Sodium D Line Data and the other "
          "alkali D-line data compilations; first-order Doppler shift; photon recoil (textbook)")

BARRIER_NO_SIGNAL = Code(
    "physics.barrier-no-signal", "warning", stage="physics",
    source=("atom number per image above a detection floor, default 100 atoms (common practice, no "
            "source); transmission as in physics.barrier-transmission"),
    doc="""
    Too few atoms on one side of the barrier to be seen: the predicted
    transmitted number (sample atoms x transmitted fraction) is below the
    detection floor (`sample: {detection_floor: ...}`, default 100 atoms), or,
    unless the barrier `expect`s `over_barrier`, the reflected number is. A
    fraction read from an image where one part is invisible carries no
    information. Lower or raise the sheet power, or change the kick.""")

BARRIER_ROTATION = Code(
    "physics.barrier-rotation", "note", stage="physics",
    source=_DRIVE,
    doc="""
    The spin rotation that an intensity-modulated barrier drives in the
    atoms it transmits. The modulation couples the sample state to the other
    hyperfine level at equal mF with a Rabi frequency that follows the local
    intensity, Omega(x) = Omega_peak exp(-2 x^2 / w_y^2); seqgen solves the
    two-component scattering problem (differential light shift and detuning
    from the Breit-Rabi line at the rig's bias field included) and reports the
    angle between the incident and the transmitted Bloch vectors, averaged over
    the momentum distribution with the transmitted probability as weight. The
    rig file does not give the sheet's polarisation; circular light (the
    largest coupling) is assumed.""")

BARRIER_SIMULATION_DISAGREES = Code(
    "physics.barrier-simulation-disagrees", "warning", stage="physics",
    source=("1D Gross-Pitaevskii equation with g1D = 2 hbar omega_perp a, Phys. Rev. Lett. 81, 938 (1998); "
            "split-step Fourier (Strang splitting), J. Comput. Phys. 187, 318 (2003); tolerances 0.05 in "
            "the transmitted fraction and 25 % (at least 1 mrad) in the rotation angle (common practice, "
            "no source); " + _DRIVE),
    doc="""
    `seqgen simulate` found that the time-dependent simulation of the push and
    the barrier disagrees with the stationary prediction of
    physics.barrier-transmission / physics.barrier-rotation: the transmitted
    fraction differs by more than 0.05, or the rotation of the transmitted
    spin by more than 25 % (and 1 mrad). The stationary model describes single
    atoms with the checks' velocity spread meeting a static sheet; the
    simulation follows the condensate from the ground state of the trap before
    the push (its mean-field energy released in the dynamics), pushed by the
    played coil current along the guide, across the sheet as it is played.
    The finding names the causes: the energies the packet meets the sheet with
    (the stationary model over the simulated packet's own momenta differs:
    in-trap spread, the 1D mean-field release, the guide's curvature along the
    path), atoms that never meet the sheet before it is off (finite barrier
    time), and what is left (the mean field during the crossing, or the
    sheet's switching). Trust the simulation within its limits (1D, one
    coupling for both components, the transverse ground state); plan the shot
    with its numbers, or change the shot so that the stationary picture holds
    (a longer sheet, a lower density, a faster push).""")

BARRIER_TOO_LATE = Code(
    "physics.barrier-too-late", "warning", stage="physics",
    source=_PASSAGE + "; at most 10 % of the cloud missed (common practice, no source)",
    doc="""
    The barrier comes on after part of the cloud has reached it: more than
    10 % of the atoms are at or past the sheet's near edge (d - w_y) when the
    barrier action starts, so they are not scattered from one side (they
    passed before, or the sheet is switched on around them). Same model as
    physics.barrier-too-short. Start the barrier earlier (the hint gives the
    latest start by which only 1 % have arrived).""")

BARRIER_NOT_REACHED = Code(
    "physics.barrier-not-reached", "error", stage="physics",
    source=_PASSAGE + "; free fall g t^2/2 with standard gravity (SI Brochure, 9th ed. (2019))",
    doc="""
    The cloud never meets the sheet. Either the first image after the push
    comes before the cloud's centre reaches the sheet (arrival t = tau +
    (d - v tau/2)/v after the push starts, for a push of duration tau to the
    speed v, the sheet d away): the image ends the flight; image later (the
    hint names the image's time by which 90 % of the cloud has crossed, as
    physics.barrier-too-short counts it), or push harder. Or a release that
    leaves no trap beam on lets the cloud fall, and by the centre's arrival it
    has fallen g t^2/2 more than the sheet's 1/e^2 half-height along the
    vertical: it passes under the sheet; release it later. Either way its
    predicted transmission does not happen and the cloud is not split.""")

BARRIER_TOO_SHORT = Code(
    "physics.barrier-too-short", "warning", stage="physics",
    source=_PASSAGE + "; at most 10 % of the cloud missed, an error from half of it on (common practice, no source)",
    doc="""
    The barrier is off before most of the cloud has crossed it: more than
    10 % of the atoms pass the sheet's far edge (d + w_y) only after the
    barrier action ends, and fly on unhindered; from 50 % on (most of the
    cloud misses the sheet) it is an error. Each atom starts at its place
    in the cloud (Thomas-Fermi or Gaussian profile along the path, as for
    physics.cloud-overlaps-barrier) with its velocity offset from the spread,
    and moves with the push (uniform acceleration over the push, then the
    pushed speed). A long cloud needs about its length over the speed; the
    hint gives the duration by which 90 % have crossed (the same fraction that
    raises the finding, so the smallest change that silences it), or says
    that no duration can, when that time falls after the first image.
    Lengthen the barrier, push harder, or shorten the cloud along the path.""")

BARRIER_TRANSMISSION = Code(
    "physics.barrier-transmission", "note", stage="physics",
    source=("optical dipole potential, Adv. At. Mol. Opt. Phys. 42, 95 (2000); 1D transmission by "
            "transfer matrices checked against the rectangular and Poeschl-Teller closed forms "
            "(Quantum Mechanics: Non-Relativistic Theory, 3rd ed., Pergamon (1977), section 25); "
            "Thomas-Fermi radius (Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge "
            "University Press (2008))"),
    doc="""
    The predicted transmitted fraction of a `barrier` action. seqgen takes
    the incident speed from the preceding `push` (|mu| b' tau / m with the
    sample state's first-order moment, or the push's `expect_velocity`), the
    velocity spread from the sample (Thomas-Fermi condensate or thermal cloud),
    the barrier V0 exp(-2 x^2 / w_y^2) from the beam's power, waists and
    wavelength, solves the stationary 1D scattering problem and averages the
    transmission over the velocity distribution. The note gives the fraction,
    its spread over the distribution, V0 and the mean kinetic energy. It
    describes a single atom crossing a static sheet, every atom meeting it from
    one side (a condensate's released mean-field energy along the path, Rev.
    Mod. Phys. 71, 463 (1999), Phys. Rev. Lett. 77, 5315 (1996), is in the
    velocity spread; the interaction during the crossing is not), and a cloud that
    already reaches the sheet when it is pushed, or a sheet that is off while
    part of the cloud passes, is outside the model (physics.cloud-overlaps-barrier,
    physics.barrier-too-short, physics.barrier-too-late).""")

CONDENSATE_AS_THERMAL = Code(
    "physics.condensate-as-thermal", "note", stage="physics",
    source=("Thomas-Fermi radius and chemical potential need a positive s-wave scattering length (Bose-Einstein "
            "Condensation in Dilute Gases, 2nd ed., Cambridge University Press (2008)); seqgen's species table "
            "(seqgen/physics/data/atoms.yaml) and the triplet length for a stretched state, Phys. Rev. A 78, "
            "012503 (2008)"),
    doc="""
    The sample says `condensed: true`, but seqgen cannot size it as a
    condensate: its data hold no positive scattering length for the sample
    state (only the stretched states take the triplet length), or the sample
    gives no atom number. No Thomas-Fermi radius, chemical potential or
    mean-field release is computed; the barrier checks take a thermal cloud
    at the sample's temperature (their messages say so), and the clouds at
    the images have no size. Raised once per shot, at the sample. State the
    cloud as thermal (`condensed: false`) if that is what it is, or use a
    state with a scattering length in seqgen's data.""")

CLOUD_CLIPPED = Code(
    "physics.cloud-clipped", "error", stage="physics",
    source=("free fall under standard gravity (SI Brochure); expansion and component positions as for "
            "physics.cloud-outside-view; aperture radius of the rig's imaging setup"),
    doc="""
    Falling, pushed and expanding after release, a component of the
    cloud reaches the apparatus aperture declared for the imaging setup
    (`aperture_radius`, e.g. the inner radius of a glass cell or waveguide,
    taken as a circle around the release point in the image plane) before
    the image is taken: atoms are lost on the wall. Positions and sizes as
    for `physics.cloud-outside-view`. Shorten the time of flight.""")

CLOUD_OUT_OF_FOCUS = Code(
    "physics.cloud-out-of-focus", "warning", stage="physics",
    source=("ballistic / Thomas-Fermi expansion and component positions as for "
            "physics.cloud-outside-view; depth of field of the imaging setup (rig file)"),
    doc="""
    At the image time a component of the cloud reaches beyond the
    imaging setup's depth of field along the line of sight (the probe
    beam's direction): its centre's distance from the focal plane (through
    the setup's `center`) plus its reach along the line of sight (its
    Thomas-Fermi radii, or 2 rms widths, per axis: an ellipsoid's
    half-extent along that direction) exceeds half the depth of field, so
    its near or far part is imaged out of focus, which blurs the picture
    and biases fitted sizes.
    Positions as for `physics.cloud-outside-view` (without a probe beam the
    line of sight is unknown and only the size is checked). Shorten the
    time of flight, image a smaller cloud, or push across the line of sight.""")

CLOUD_OUTSIDE_VIEW = Code(
    "physics.cloud-outside-view", "error", stage="physics",
    source=("free fall under standard gravity (SI Brochure); condensate in a changing trap and its expansion"
            " Phys. Rev. Lett. 77, 5315 (1996), Phys. Rev. A 54, R1753 (1996); ballistic thermal expansion"
            " (textbook); Stern-Gerlach and push "
            "displacements with moments from the Breit-Rabi formula, Phys. Rev. 38, 2082 (1931), force"
            " = moment x grad|B|, uniform acceleration then free flight (textbook); the reflected part of a"
            " barrier's split, momentum -hbar k along the normal (Quantum Mechanics: Non-Relativistic Theory,"
            " 3rd ed., Pergamon (1977), section 25)"),
    doc="""
    At the image time a component of the cloud lies partly or wholly
    outside the imaging setup's field of view. Each internal-state
    component is followed from where it was released: free fall, every
    push and Stern-Gerlach `separate` before the image (moment -dE/dB of
    the state it is in, Breit-Rabi at the rig's bias, force = moment x
    |b'| along the coil's `field_grows_along`, or along its `axis` both
    ways when the rig does not say; uniform acceleration during the pulse,
    then free flight), and expansion (Thomas-Fermi scaling solution for a
    condensate, followed through the optical trap's changes before the
    release; ballistic for a thermal cloud; from an optical trap, an
    Ioffe-Pritchard trap, or the Boltzmann profile of a linear quadrupole),
    per principal axis. Its centre plus its reach along each axis of the
    image plane (the plane perpendicular to the probe beam; Thomas-Fermi
    radii, or 2 rms widths, projected on that axis) must lie within half
    the field of view of the setup's `center`.
    A barrier sheet splits the component it meets into a transmitted part
    and a reflected part flying back from the sheet (specular reflection
    at the centre's arrival); each part is judged, and a reflected part
    out of view has its own finding, whose fix names an earlier image.
    Without a size prediction the centre alone is checked. Shorten the
    time of flight, weaken the separation, or recentre the camera.""")

CLOUD_OVERLAPS_BARRIER = Code(
    "physics.cloud-overlaps-barrier", "warning", stage="physics",
    source=_PASSAGE + "; a thermal cloud's edge at 2.5 rms widths (common practice, no source)",
    doc="""
    The cloud already reaches the barrier when it is pushed. Its edge along
    the path, in the trap just before the push (a condensate's Thomas-Fermi
    radius R along the path, from the trap frequencies and the atom number; a
    thermal cloud's 2.5 rms widths sqrt(k_B T / (m omega^2))), plus the sheet's
    1/e^2 half-width w_y, reaches the sheet's distance d from the atoms along
    the path (the barrier beam's rig `position`, the atoms at the rig's
    origin). Part of the cloud then sits in or beyond the sheet before it
    moves, which the transmission model (every atom arriving from one side
    at the pushed speed) does not describe, and the predicted fraction means
    little. Move the sheet farther from the atoms, or make the cloud shorter
    along the path: a tighter trap along the path at the push (e.g. a crossed
    beam switched off as the push starts), fewer atoms, or a colder cloud.""")

COMPONENTS_OVERLAP = Code(
    "physics.components-overlap", "error", stage="physics",
    source=("Stern-Gerlach separation: relative acceleration (mu_1 - mu_2) b'/m with moments from the "
            "Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); rms of a Thomas-Fermi profile R/sqrt(7) "
            "(Bose-Einstein Condensation in Dilute Gases, Cambridge University Press, 2nd ed. 2008); "
            "at least 3 combined rms widths (common practice, no source)"),
    doc="""
    After the Stern-Gerlach separation the two components still overlap
    at the image: their relative displacement (relative acceleration
    (mu_1 - mu_2) b'/m during the gradient pulse, then free drift until the
    image) is less than 3 combined rms widths, sqrt(sigma_1^2 + sigma_2^2).
    The width is that of the cloud at the image along the line that joins
    the two centres (the gradient's direction): ballistic thermal, or the
    Thomas-Fermi scaling solution with rms R/sqrt(7), an ellipsoid with
    radii R_j reaching sqrt(sum (R_j u_j)^2) along the unit vector u. Raise
    the gradient, lengthen the pulse, or image later.""")

COMPONENTS_SEPARATED = Code(
    "physics.components-separated", "note", stage="physics",
    source=_STERN_GERLACH,
    doc="""
    How well a Stern-Gerlach separation resolves the two components at
    the image: their distance in combined rms widths (3 or more is enough;
    see `physics.components-overlap`).""")

PARTS_OVERLAP = Code(
    "physics.parts-overlap", "warning", stage="physics",
    source=("specular reflection off a thin sheet, the reflected part moving back at the incident speed "
            "(Quantum Mechanics: Non-Relativistic Theory, 3rd ed., Pergamon (1977), section 25); rms of a "
            "Thomas-Fermi line density (15/16R)(1 - x^2/R^2)^2 (Rev. Mod. Phys. 71, 463 (1999)) or a Gaussian's "
            "tail; at most 2 % of a part beyond the midpoint between two parts (common practice, no source)"),
    doc="""
    The transmitted and reflected parts of one internal state, split by a
    barrier sheet, overlap at an image: more than 2 % of each lies beyond
    the midpoint between their centres (measured in the image plane, for
    the whole cloud's size along the line joining them: both parts keep
    it), so a count of each side of the picture mixes them and the
    transmitted fraction read from it is off by that much. They part at
    twice the incident speed once the guide no longer holds them: image
    later, or push harder.""")

DRIVE_TOO_STRONG = Code(
    "physics.drive-too-strong", "warning", stage="physics",
    source=_DRIVE + "; weak-probe regime (common practice, no source)",
    doc="""
    The drive inside the barrier rotates the transmitted spin by more than
    `limits: {weak_probe_angle: ...}` (default 0.3 rad). A weak probe reads the
    time the atoms spend in the barrier in linear response; a strong drive
    changes the scattering itself (the two dressed states see different
    barriers) and the rotation no longer measures that time. Lower the
    modulation depth or the sheet power.""")

EQUAL_MOMENTS = Code(
    "physics.equal-moments", "error", stage="physics",
    source=_STERN_GERLACH,
    doc="""
    A Stern-Gerlach separation of two states with equal magnetic moments
    (within 0.01 mu_B at the bias field): the gradient moves both alike and
    cannot separate them. The states are those that hold atoms when the
    gradient pulse starts, followed from the sample state through the clock
    pulses and sweeps before it (see `physics.transition-unpopulated`). Pick
    a transition to a state with another moment, or separate the components
    another way.""")

IMAGING_BLUR = Code(
    "physics.imaging-blur", "warning", stage="physics",
    source=(_PROBE + ("; recoil random walk sigma = v_rec tau sqrt(N)/3 (derived in "
                     "seqgen.physics.imaging.recoil_blur)")),
    doc="""
    The random walk of spontaneous-emission recoils during the probe
    blurs the image by more than one camera pixel in the atom plane (pixel
    size / magnification): sigma = v_rec tau sqrt(N) / 3 for N photons over
    the probe duration tau. Shorten the probe pulse or lower its power.""")

MAGNETIC_TRAP_LOST = Code(
    "physics.magnetic-trap-lost", "error", stage="physics",
    source=("force = moment x gradient of |B|, standard gravity g_n (SI Brochure); levitation gradient"
            " m g / |mu|; Ioffe-Pritchard field, Phys. Rev. Lett. 51, 1336 (1983)"),
    doc="""
    The magnetic trap of a hold does not hold the atoms against gravity.

    A quadrupole (B = M r, linear) holds a low-field seeker of moment mu only
    if |mu| G_hold >= m g_n, where G_hold = 1/|M^-1 up| is the gradient that
    gravity meets (for one coil pair: the axial gradient when its axis is
    vertical, half of it when horizontal): below the levitation gradient
    m g_n / |mu| the atoms fall through. In an Ioffe-Pritchard trap the radial
    field grows at B' far from the axis, so |mu| B' must carry the weight
    across the axis; and B'' > 0 and B'^2/B0 > B''/2 are needed for
    confinement at all. Not raised while optical trap beams are on (a hybrid
    trap). Raise the currents (the hint gives the factor), or use a stronger
    coil.""")

MAJORANA_LOSS = Code(
    "physics.majorana-loss", "warning", stage="physics",
    source=("Majorana loss rate ~ hbar / (m l^2) for a cloud of size l = k_B T / (|mu| b') in a "
            "quadrupole trap, Phys. Rev. Lett. 74, 3352 (1995) (from memory); Larmor frequency against"
            " the trap and field-rotation rates x 10 (common practice, no source)"),
    doc="""
    Atoms are lost by Majorana spin flips near a field zero or a weak field minimum.

    In a quadrupole trap the field vanishes at the centre; within about
    r0 = sqrt(hbar v / (|mu| b')) the field direction turns faster than the
    spin can follow and the atom flips to an untrapped state. The loss rate is
    of order hbar / (m l^2), l = k_B T / (|mu| b') the cloud size (b' the
    weakest gradient); the warning fires when the hold is longer than this
    lifetime m l^2 / hbar (an order-of-magnitude estimate: cold clouds are
    lost fastest). In an Ioffe-Pritchard trap it fires when the bias B0 is
    zero or negative (a field zero), or when the Larmor frequency at B0 is
    less than 10 times the larger of the radial trap frequency and the rate
    v B'/B0 at which the field turns for an atom crossing the axis (v =
    sqrt(k_B T / m)). Shorten the hold, plug the zero (optical plug,
    Ioffe-Pritchard trap, rotating bias), or raise the bias.""")

MODULATION_OFF_RESONANCE = Code(
    "physics.modulation-off-resonance", "warning", stage="physics",
    source=("modulated-beam Raman coupling through the vector light shift and differential light "
            "shift, Adv. At. Mol. Opt. Phys. 42, 95 (2000); Breit-Rabi formula, Phys. Rev. 38, 2082 "
            "(1931); resonance within one Rabi frequency (common practice, no source)"),
    doc="""
    A barrier's intensity modulation is off the transition it should drive
    by more than the drive's Rabi frequency, so it barely drives it. The
    transition is the barrier's `modulation: {transition: ...}` (default:
    the sample state to the other hyperfine level at equal mF; the model
    couples equal mF only); its frequency is the Breit-Rabi line at the bias
    field plus the time-averaged differential light shift of the sheet. The
    Rabi frequency is that of the co-propagating Raman pair made by the
    modulation (vector light shift, circular polarisation assumed since the
    rig file does not give it, so the largest coupling), at the peak intensity
    2P/(pi w w_y). seqgen warns when the offset exceeds both that Rabi
    frequency and the Fourier width of the barrier pulse (0.886 / duration,
    the FWHM of a square pulse's power spectrum): within either the drive
    still works. Atoms crossing the sheet see it only for their transit
    time, which widens the line further; see `physics.barrier-rotation`.
    A `transition` the model does not couple (Delta mF != 0,
    physics.transition-forbidden) is compared with its bare Breit-Rabi line
    within the Fourier width alone.
    Tune `modulation: {frequency: ...}` to the line (the hint gives it).""")

NONADIABATIC_RAMP = Code(
    "physics.nonadiabatic-ramp", "warning", stage="physics",
    source=("Ermakov scaling equation, J. Math. Phys. 10, 1458 (1969); adiabaticity |d omega/dt| << "
            "omega^2 (common practice, no source)"),
    doc="""
    A trap ramp that leaves the cloud excited. For each axis seqgen follows
    the trap frequency through the ramp (from beam powers, waists and the
    species' polarizability), integrates the Ermakov scaling equation
    b'' + omega(t)^2 b = omega_0^2 / b^3 and reports the final energy above the
    adiabatic value, E / E_ad - 1, which for a harmonic trap is the same for
    every initial state (so for a thermal cloud too). Plain sets that step the
    trap at once are a sudden change: E / E_ad = (omega0^2 + omega1^2) /
    (2 omega0 omega1) per axis (virial theorem and the adiabatic invariant
    E / omega, from memory); a set that lets the atoms go along an axis (its
    frequency below a tenth), switches the trap on or leaves none is not one.
    The threshold is `limits: {max_excitation: ...}` (default 0.05). Lengthen
    the ramp, use a smooth shape, replace a set by a ramp at least as long as
    the fix names, or accept the finding with a reason.""")

NOTHING_IMAGED = Code(
    "physics.nothing-imaged", "warning", stage="physics",
    source=("ground hyperfine splittings (Rev. Mod. Phys. 49, 31 (1977)) of hundreds of natural linewidths "
            "(alkali D-line data compilations): a probe on one level's cycling line scatters off the other "
            "level at the Lorentzian rate R = (Gamma/2) s / (1 + s + 4 Delta^2/Gamma^2), Laser Cooling and "
            "Trapping, Springer (1999) (from memory); populations and detection floor as for "
            "physics.transition-unpopulated"),
    doc="""
    A state-selective image (the setup's `imaged_F` in the rig) of a level
    that holds no atoms: every populated component at the image is in
    another ground hyperfine level, so the probe, without a repumper, is a
    ground-state splitting away from them (1.77 GHz, about 180 natural
    linewidths, for sodium; 6.83 GHz, about 1100, for rubidium-87) and the
    picture is blank.
    The populations are followed from the sample state through the clock
    pulses, sweeps and magnetic holds before the image; a state counts as
    empty below the sample's `detection_floor` (default 100 atoms) or 1 %
    of the atoms; a barrier's modulation that may have filled the level
    keeps the check silent. Image the populated level (`imaged_F`, or none
    for a repumped probe), or move atoms into the imaged level before the
    image (a repump pulse, a clock pulse or a sweep).""")

NOT_TUNNELLING = Code(
    "physics.not-tunnelling", "warning", stage="physics",
    source=("classical turning point: transmission below the barrier top is tunnelling (any quantum "
            "mechanics text)"),
    doc="""
    The barrier's `expect:` does not match the energies: `expect: tunnelling`
    but the mean kinetic energy m <v^2> / 2 of the incident atoms is above the
    barrier top V0 (the atoms pass over it classically), or
    `expect: over_barrier` but it is below V0. Change the sheet power or the
    kick, or correct `expect`.""")

PROBE_DOPPLER = Code(
    "physics.probe-doppler", "warning", stage="physics",
    source=_PROBE + "; 1 linewidth (common practice, no source)",
    doc="""
    The imaging probe pushes the atoms out of resonance: after N absorbed
    photons an atom moves at N v_rec along the probe and sees a Doppler shift
    N v_rec / lambda, here more than one natural linewidth of the D2 line, so
    the last part of the pulse is absorbed less and the atom number comes out
    low. N = R tau with the steady-state rate R = (Gamma/2) s / (1 + s + 4
    Delta^2/Gamma^2) and s = 2P/(pi w^2)/I_sat of the probe beam. Shorten the
    probe pulse or lower its power.""")

PROBE_OFF_RESONANCE = Code(
    "physics.probe-off-resonance", "error", stage="physics",
    source=("D-line wavelengths and natural linewidths: the alkali D-line data compilations (Sodium D Line "
            "Data, Rubidium 87 D Line Data, ...); steady-state scattering rate R = (Gamma/2) s / (1 + s + "
            "4 Delta^2/Gamma^2): Laser Cooling and Trapping, Springer (1999) (from memory); 3 natural "
            "linewidths, and a wavelength written to 0.001 nm naming its line (common practice, no source)"),
    doc="""
    The imaging probe is not on a D line of the sample's species: the
    beam's wavelength is detuned from the nearest D line, delta = c/lambda -
    c/lambda_0, by more than 3 natural linewidths (and more than the
    rounding of a wavelength written to 0.001 nm, so that 589.158 nm still
    names the sodium D2 line). Such a probe scatters (Gamma/2) s Gamma^2 /
    (4 delta^2) photons per second at low saturation, far fewer than on
    resonance: the image shows few or no atoms (a rig built for another
    species keeps its old probe). seqgen computes the scattering with this
    detuning. Set the probe beam's wavelength to the species' D2 line.""")

PULSE_ANGLE = Code(
    "physics.pulse-angle", "error", stage="physics",
    source=("pulse area theorem, Phys. Rev. 183, 457 (1969); the rig file's drive calibration "
            "(rabi_per_amplitude) and the amplitude envelope as compiled"),
    doc="""
    A clock pulse's declared `angle` does not match its pulse area. seqgen
    integrates the Rabi frequency over the pulse: the drive's calibration
    (`rabi_per_amplitude` in the rig file, Omega/2pi at amplitude 1) times the
    amplitude written to the drive's channel, with the envelope (square,
    Blackman, Gaussian) exactly as compiled. A resonant pulse rotates the
    state by this area (pi/2: equal superposition, pi: inversion). The
    allowed relative difference is `limits: {angle_tolerance: ...}` (default
    0.05). Change the duration or the amplitude (the hint gives both), or
    recalibrate the drive in the rig file.""")

PULSE_DETUNED = Code(
    "physics.pulse-detuned", "warning", stage="physics",
    source=("Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); Rabi formula, Phys. Rev. 51, 652 (1937); "
            "Bloch propagation with a Magnus integrator, Phys. Rep. 470, 151 (2009); 10 % of the "
            "intended transfer (common practice, no source)"),
    doc="""
    A clock pulse's `frequency` is so far from the transition that the
    pulse does not do what it should. The line is the Breit-Rabi frequency of
    the pulse's `transition` (default: the sample state to the other
    hyperfine level at equal mF) at the rig's bias field, plus the drive's
    `light_shift`. seqgen integrates the Bloch equations of the actual pulse
    (envelope as compiled) at the actual detuning and at the intended one
    (`detuning:`, default 0) and warns when the transfer differs by more than
    10 % of the intended transfer. The message gives the Fourier width of
    the pulse: the detuning it tolerates is about a fraction of it. Set the
    frequency to the line (the hint gives it) or declare the detuning.""")

PUSH_AWAY_FROM_BARRIER = Code(
    "physics.push-away-from-barrier", "error", stage="physics",
    source=("force = moment x grad|B| with moment = -dE/dB (Breit-Rabi formula, Phys. Rev. 38, 2082 "
            "(1931)); photon recoil along the beam (textbook); the rig file's field_grows_along and "
            "beam positions"),
    doc="""
    A push sends the atoms away from the barrier that follows it. A
    magnetic push moves a state with moment mu = -dE/dB > 0 (a high-field
    seeker) towards stronger field and a low-field seeker (mu < 0) towards
    weaker field; the rig's coil says where the field grows
    (`field_grows_along`); an optical push moves atoms along its beam. The
    barrier beam's `position` in the rig is taken relative to the atoms
    before the push (the trap centre, the rig's origin). Usually the sample
    is in the wrong state (e.g. |F=2, mF=-2> instead of |F=1, mF=-1>), or
    the coil or the barrier sits on the other side. (Reversing a coil's
    current does not reverse where its |B| grows.) Without `field_grows_along` the direction of a magnetic push is
    unknown and this check is silent.""")

PUSH_NO_FORCE = Code(
    "physics.push-no-force", "error", stage="physics",
    source=("Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); mF = 0 states have no first-order moment "
            "(common practice, no source)"),
    doc="""
    A magnetic push on a state without a first-order magnetic moment
    (mF = 0, or |mu| below 0.01 mu_B at the bias field): the gradient does
    not move the atoms. Transfer the atoms to a magnetic state first (a
    clock pulse or a sweep), or push with light.""")

PUSH_TOO_LATE = Code(
    "physics.push-too-late", "warning", stage="physics",
    source=("uniform acceleration during the push, then free flight (textbook); Breit-Rabi formula, "
            "Phys. Rev. 38, 2082 (1931); force = moment x field gradient and dv = F t / m (textbook); "
            "photon recoil and steady-state scattering, Adv. At. Mol. Opt. Phys. 42, 95 (2000)"),
    doc="""
    The atoms pushed towards `target_distance` arrive only after the next
    barrier has ended: the barrier meets no atoms. The arrival time follows
    from the push's velocity (as for `physics.push-velocity`), uniform
    acceleration during the push and free flight after it. Start the barrier
    block later, make it longer, or push harder.""")

PUSH_VELOCITY = Code(
    "physics.push-velocity", "error", stage="physics",
    source=("Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); force = moment x field gradient and dv = "
            "F t / m (textbook); photon recoil and steady-state scattering, Adv. At. Mol. Opt. Phys. "
            "42, 95 (2000)"),
    doc="""
    A push does not give the velocity its `expect_velocity` says. A
    magnetic push gives |dv| = |mu| b' tau / m with mu = -dE/dB of the sample
    state from the Breit-Rabi formula at the rig's bias field, b' the
    gradient and tau the duration; an optical push gives N v_rec with N the
    photons scattered from the beam (steady-state rate, saturation from the
    beam's power and waist). Magnitudes are compared (the direction is
    physics.push-away-from-barrier's business); the allowed
    relative difference is the push's `tolerance` (default 0.1). Change the
    gradient or the duration (the hint gives the duration), or fix
    `expect_velocity`.""")

REPULSIVE_TRAP_BEAM = Code(
    "physics.repulsive-trap-beam", "error", stage="physics",
    source=("dipole potential from the scalar polarisability: D1 and D2 lines with counter-rotating terms, "
            "Adv. At. Mol. Opt. Phys. 42, 95 (2000); the next P lines, Phys. Rev. A 60, 4476 (1999); the "
            "ionic core, Phys. Rev. A 49, 982 (1994)"),
    doc="""
    A beam declared as a trap (`role: trap`) repels the sample's atoms: at
    its wavelength the ground-state light shift of the species (D1 and D2
    lines, the next P lines and the ionic core) is positive, i.e. the light
    is blue of the lines (532 nm for rubidium), and the atoms are pushed out of the
    intensity maximum instead of held in it. More power makes it worse.
    Use a wavelength red of the D1 line (e.g. 1064 nm), or give the beam
    another role if it is meant as a barrier.""")

ROTATION_UNRESOLVABLE = Code(
    "physics.rotation-unresolvable", "warning", stage="physics",
    source=(_DRIVE + ("; atom shot noise 1/sqrt(N) of a spin-rotation measurement (quantum projection "
                     "noise, Phys. Rev. A 47, 3554 (1993), from memory)")),
    doc="""
    The spin rotation driven inside the barrier is smaller than the atom
    shot noise of the transmitted atoms, about 1/sqrt(N_transmitted) rad, so
    one shot cannot resolve it. Usual causes: a modulation frequency off the
    transition (the message gives the detuning), a modulation depth too small,
    or too few transmitted atoms.""")

SHALLOW_TRAP = Code(
    "physics.shallow-trap", "warning", stage="physics",
    source=("truncation parameter eta = U / k_B T of about 6 to 10 in evaporation (common practice, no"
            " source)"),
    doc="""
    At the end of a change of the trap beams (a `trap_ramp`, or any ramp or
    set on a trap beam's power channel) the depth is less than
    `limits.min_eta` (default 5) times k_B T of the sample: atoms spill out.
    The depth is that of the lowest way out of the 3D potential of all trap
    beams on, with gravity (the saddle or shoulder the atoms leave over, e.g.
    along a strong guide over a weak dimple); the message names the way out.
    Intended in forced evaporation; accept it there with a reason.""")

STATE_NOT_TRAPPABLE = Code(
    "physics.state-not-trappable", "error", stage="physics",
    source=("Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); a static field has no maximum in free "
            "space, so only low-field seekers are trapped (Phys. Rev. Lett. 51, 1336 (1983)) (from "
            "memory)"),
    doc="""
    The state held in a magnetic trap is not a low-field seeker: a
    high-field seeker (its energy falls as the field grows, moment = -dE/dB
    > 0) or a state without magnetic moment (mF = 0, |moment| below 0.01 mu_B).
    A static magnetic field has a minimum of |B| but no maximum in free
    space, so only low-field seekers are held; the others fall out at once.
    The moment comes from the Breit-Rabi formula at the trap's bottom field
    for the sample state (or the hold's `state:`). Transfer the atoms to a
    low-field-seeking state first (a clock pulse or a sweep), or hold them in
    an optical trap.""")

SWEEP_NOT_ADIABATIC = Code(
    "physics.sweep-not-adiabatic", "warning", stage="physics",
    source=("Landau-Zener formula, Proc. R. Soc. A 137, 696 (1932); Breit-Rabi formula, Phys. Rev. 38,"
            " 2082 (1931); 90 % transfer (common practice, no source)"),
    doc="""
    A rapid adiabatic passage that does not transfer the atoms: a `sweep`
    of a drive's frequency while its amplitude is on either misses the line
    (Breit-Rabi at the bias field plus the drive's light shift; the sample
    state to the other hyperfine level at equal mF), or crosses it too fast.
    At the crossing seqgen takes the sweep rate and the Rabi frequency and
    gives the Landau-Zener transfer 1 - exp(-pi Omega^2 / (2 |d Delta/dt|));
    it warns below 0.9. The message also gives the transfer of the actual,
    finite sweep from integrating the Bloch equations (it differs from
    Landau-Zener when the sweep starts or ends within a few Rabi frequencies
    of the line). Sweep more slowly, raise the amplitude, or widen the sweep.""")

TRANSITION_FORBIDDEN = Code(
    "physics.transition-forbidden", "error", stage="physics",
    source=("magnetic-dipole matrix elements <f| mu.e |i>, mu = -mu_B (g_J J + g_I I), between the Breit-Rabi "
            "eigenstates of the ground hyperfine manifold (Phys. Rev. 38, 2082 (1931); Hamiltonian of Rev. Mod. "
            "Phys. 49, 31 (1977)); selection rule Delta m = q of the Wigner-Eckart theorem; the rig file's "
            "drive polarisation and calibrated_on"),
    doc="""
    A clock pulse or frequency sweep drives a transition that its drive's
    polarisation cannot drive: the magnetic-dipole matrix element is zero,
    so the atoms are not moved whatever the amplitude or duration (e.g. a
    `pi` drive on |F=1, mF=-1> -> |F=2, mF=0>, Delta mF = 1; a `sigma+`
    drive couples only mF_upper = mF_lower + 1, upper and lower by energy).
    The polarisation is the rig's `drives: {NAME: {polarisation: ...}}`
    (sigma+, sigma-, pi, or the field's direction [x, y, z] relative to the
    bias axis); without it seqgen assumes every transition is driven. The
    hint names a transition from the same state that the drive does drive,
    with the duration that gives the pulse's `angle` on it and its line.
    Also reported at the rig's drive when its `calibrated_on` transition is
    one the polarisation cannot drive, or not a transition of the sample's
    species: rabi_per_amplitude cannot then be carried over to other
    transitions (it is used unscaled). An error, as physics.pulse-angle: the
    pulse's area is zero, whatever rotation it was written for.
    Also a warning at a `barrier` whose `modulation: {transition: ...}` is
    not two hyperfine levels at equal mF: seqgen's model of a modulated
    sheet (a co-propagating Raman pair through the vector light shift,
    circular light along the bias field) couples only those, so the
    modulation drives nothing (a warning: the rig gives neither the sheet's
    polarisation nor its angle to the bias). The hint names the pair from a
    populated state and its light-shifted line.""")

TRANSITION_UNPOPULATED = Code(
    "physics.transition-unpopulated", "warning", stage="physics",
    source=("populations followed from the sample state through clock pulses (Rabi formula, Phys. Rev."
            " 51, 652 (1937), Bloch propagation as for physics.pulse-detuned) and sweeps (Landau-Zener"
            " formula, Proc. R. Soc. A 137, 696 (1932)); a two-level drive acts only on atoms in one "
            "of its two states (common practice, no source)"),
    doc="""
    A clock pulse drives a transition neither of whose states holds any
    atoms: the pulse does nothing (e.g. the sample is in |F=2, mF=+2> and
    the pulse's `transition` is |F=1, mF=-1> -> |F=2, mF=-2>). seqgen follows
    the populations from the sample state through the earlier clock pulses
    (their transfer from the Bloch equations of the pulse as compiled) and
    frequency sweeps (Landau-Zener / Bloch transfer), incoherently; a
    barrier's modulation drive makes its other state possibly populated, and
    a `magnetic_hold` with `state:` puts the atoms in that state. A state
    counts as empty below the sample's `detection_floor` (default 100 atoms)
    or below 1 % of the atoms. A warning, not an error: a drive seqgen does
    not model may have filled the state. Fix the pulse's `transition` or
    the sample's `state`. Also raised at a `barrier` whose modulation's
    `transition` holds no atoms: the modulation drives nothing (the hint
    names the pair from a populated state and its light-shifted line).""")

TRAP_HEATING = Code(
    "physics.trap-heating", "warning", stage="physics",
    source=("photon scattering rate of the D lines and recoil heating dT/dt = T_rec Gamma_sc / 3 in a "
            "harmonic trap: Adv. At. Mol. Opt. Phys. 42, 95 (2000); heating above the sample temperature "
            "(common practice, no source)"),
    doc="""
    The trap light heats the atoms during a trap ramp: each photon
    scattered from the trap beams adds two recoil energies, so at the trap
    minimum dT/dt = T_rec Gamma_sc / 3 (k_B T_rec = hbar^2 k^2 / m), and
    integrated over the ramp (with the power as played) the heating exceeds
    the sample's temperature. A trap close to the D lines (a few nm) scatters
    orders of magnitude more than one at 1064 nm for the same depth, since
    the depth falls as 1/Delta but the scattering as 1/Delta^2. Use a trap
    wavelength farther from the lines, a shorter stage, or less power.""")

TRAP_LOST = Code(
    "physics.trap-lost", "error", stage="physics",
    source=("optical dipole potential: Adv. At. Mol. Opt. Phys. 42, 95 (2000); standard gravity g_n "
            "(SI Brochure)"),
    doc="""
    During a change of the trap beams (a `trap_ramp`, or any ramp or set on a
    trap beam's power channel) the optical trap no longer holds the atoms
    against gravity: the depth of the lowest way out of the 3D potential,
    with the gravitational tilt m g z, drops to zero. Computed from the
    powers the hardware plays (after calibration and DAC codes), the rig's
    waists and wavelengths, and the species' polarisability. Raise the final power, or declare the release with a
    `release` action if dropping the atoms is intended. A trap beam blue of
    the D lines repels the atoms at any power (physics.repulsive-trap-beam);
    the hint then points at its wavelength instead.""")
