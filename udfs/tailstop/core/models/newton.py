"""One step of a damped Newton iteration for a two-parameter maximum likelihood, vectorized over rows."""
from __future__ import annotations

import numpy as np

__all__ = ["damped_newton_step"]


def damped_newton_step(gradient, hessian, largest_steps):
    """The Newton step (x, y) towards a maximum, for every row at once.

    ``gradient`` = (g_x, g_y), ``hessian`` = (h_xx, h_xy, h_yy). Where the
    Hessian is not negative definite its largest eigenvalue is shifted below
    zero (Levenberg), so the step always goes uphill; the step is then scaled
    down so that neither part exceeds ``largest_steps`` = (most x, most y).
    """
    g_x, g_y = gradient
    h_xx, h_xy, h_yy = hessian
    mean, spread = 0.5 * (h_xx + h_yy), np.hypot(0.5 * (h_xx - h_yy), h_xy)
    shift = np.maximum(0.0, mean + spread + 1e-6 * np.abs(mean) + 1e-12)
    h_xx, h_yy = h_xx - shift, h_yy - shift
    determinant = h_xx * h_yy - h_xy * h_xy
    step_x = -(h_yy * g_x - h_xy * g_y) / determinant
    step_y = -(h_xx * g_y - h_xy * g_x) / determinant
    most_x, most_y = largest_steps
    largest = np.maximum(np.abs(step_x) / most_x, np.abs(step_y) / most_y)
    limit = np.where(largest > 1.0, 1.0 / largest, 1.0)
    return step_x * limit, step_y * limit
