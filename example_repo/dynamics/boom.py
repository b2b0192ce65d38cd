"""Irrigation boom of the greenhouse (invented): a swinging boom with viscous damping.

angle'' = -(g/l) sin(angle) - damping * angle' + torque
"""

import numpy as np


def field(x, u, damping=0.8, g_over_l=2.0):
    angle, rate = x[0], x[1]
    return np.array([rate, -g_over_l * np.sin(angle) - damping * rate + u[0]])
