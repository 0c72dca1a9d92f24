"""Every atom at one speed."""

from .base import SpeedDistribution


class Monoenergetic(SpeedDistribution):
    """Parameters
    ----------
    speed : float
        m/s.
    """

    def __init__(self, speed):
        self.single_speed = speed

    def support(self):
        return (self.single_speed, self.single_speed)

    def density(self, v):
        raise TypeError("a monoenergetic source has no density; use single_speed")

    def mean(self):
        return self.single_speed
