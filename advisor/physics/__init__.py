"""Physics: vectorised numpy formulas the advisor's features and decision are built from.

    sun       solar elevation/azimuth, hours since sunset/sunrise,    (NOAA / Meeus ch. 15, 25)
              day/night state through polar day and polar night
    ephemeris private engine of sun and sky: UTC -> days, GMST, the sun's place
    moisture  saturation vapour pressure, dew point, RH, spread        (Magnus, Alduchov & Eskridge 1996)
    aperture  wavelength, Ruze efficiency, surface tolerance, beam     (Ruze 1966)
    sky       sidereal time, precession, source elevation/visibility   (Meeus ch. 12, 21)
    atmosphere water vapour, PWV, zenith opacity, transmission, T_sys*,  (ITU-R P.676-12, P.835)
              integration-time factor
    absorption oxygen and water-vapour attenuation, equivalent heights  (ITU-R P.676-12)
    p676_tables the Recommendation's line tables (data)

Every function is pure: it takes scalars or numpy arrays (times as numpy ``datetime64``
or pandas UTC datetimes) and returns numpy arrays; no files, clock or terminal.
Import the submodules directly, e.g. ``from advisor.physics import sun``.
"""
