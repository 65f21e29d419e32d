"""Geographic (longitude, latitude) coordinates to local planar metres.

Samples given in WGS84 degrees are projected with a local azimuthal equidistant
projection centred on the data centroid, on a sphere of mean Earth radius
R = 6,371,008.8 m (IUGG mean radius). Distances and bearings *from the centre*
are exact on that sphere; between two other points the relative distance error
grows roughly as (rho / R)^2 / 6 for points a distance rho from the centre, so it
stays below 1e-4 for data spanning up to about 300 km. Projected +y is true north
at the centre; elsewhere grid north departs from true north by the meridian
convergence (about dlon * sin(lat)), under 0.3 degrees across a 50 km field at
mid-latitudes. Snyder (1987), *Map Projections: A Working Manual*, USGS PP 1395,
eqs. 25-2 and 22-4/22-5.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

EARTH_RADIUS_M = 6_371_008.8
ACCURATE_SPAN_M = 300_000.0


@dataclass(frozen=True)
class LocalProjection:
    """Centre of the projection.

    Attributes
    ----------
    longitude, latitude : float, degrees
        The centre (data centroid on the sphere).
    """

    longitude: float
    latitude: float

    def forward(self, lon: np.ndarray, lat: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Project degrees to metres east (x) and north (y) of the centre."""
        lam0, phi0 = np.radians(self.longitude), np.radians(self.latitude)
        lam, phi = np.radians(lon), np.radians(lat)
        dlam = lam - lam0
        cos_c = np.sin(phi0) * np.sin(phi) + np.cos(phi0) * np.cos(phi) * np.cos(dlam)
        c = np.arccos(np.clip(cos_c, -1.0, 1.0))
        # k' = c / sin c, with its limit 1 at the centre (Snyder 1987, eq. 25-2).
        with np.errstate(invalid="ignore", divide="ignore"):
            k = np.where(c > 1e-12, c / np.sin(c), 1.0)
        x = EARTH_RADIUS_M * k * np.cos(phi) * np.sin(dlam)
        y = EARTH_RADIUS_M * k * (np.cos(phi0) * np.sin(phi) - np.sin(phi0) * np.cos(phi) * np.cos(dlam))
        return x, y

    def inverse(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Metres east (x) and north (y) of the centre back to longitude and latitude, degrees."""
        lam0, phi0 = np.radians(self.longitude), np.radians(self.latitude)
        x, y = np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
        rho = np.hypot(x, y)
        c = rho / EARTH_RADIUS_M  # angular distance from the centre (Snyder 1987, eq. 25-15)
        with np.errstate(invalid="ignore", divide="ignore"):
            along = np.where(rho > 0, y * np.sin(c) / rho, 0.0)
        # Snyder (1987), eqs. 20-14 and 20-15 (general spherical inverse with c from rho).
        phi = np.arcsin(np.clip(np.cos(c) * np.sin(phi0) + along * np.cos(phi0), -1.0, 1.0))
        lam = lam0 + np.arctan2(x * np.sin(c), rho * np.cos(phi0) * np.cos(c) - y * np.sin(phi0) * np.sin(c))
        lon = (np.degrees(lam) + 180.0) % 360.0 - 180.0
        return lon, np.degrees(phi)


def centroid(lon: np.ndarray, lat: np.ndarray) -> LocalProjection:
    """Spherical centroid of the points (mean of unit vectors), as a projection centre."""
    lam, phi = np.radians(lon), np.radians(lat)
    v = np.array([np.mean(np.cos(phi) * np.cos(lam)), np.mean(np.cos(phi) * np.sin(lam)), np.mean(np.sin(phi))])
    lon0 = float(np.degrees(np.arctan2(v[1], v[0])))
    lat0 = float(np.degrees(np.arctan2(v[2], np.hypot(v[0], v[1]))))
    return LocalProjection(longitude=lon0, latitude=lat0)
