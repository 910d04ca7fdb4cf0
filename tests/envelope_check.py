"""Independent check of `termvel envelope --from/--to` for a constant-power
car with aerodynamic drag AND rolling resistance, where no closed form
exists. Run by tests/suite/envelope.rs with the venv's Python (scipy from
tests/requirements.txt).

Model (REFERENCES.md "Power-limited acceleration"):
    m_eff * dv/dt = P/v - k*v^2 - c,   dx/dt = v
so, with F(v) = P/v - k*v^2 - c > 0 between the two speeds,
    t = integral of m_eff / F(v) dv,   x = integral of m_eff * v / F(v) dv.

Two ways, neither shared with termvel's code:
  1. scipy.integrate.quad over speed (adaptive Gauss-Kronrod, QUADPACK);
  2. scipy.integrate.solve_ivp over time (DOP853), with an event at v1.
Both must agree with each other to 1e-7 before either is printed.

Usage: envelope_check.py M_EFF_KG P_W K_KG_M C_N V0_MPS V1_MPS
Prints one JSON line: {"time_s": ..., "distance_m": ..., "ivp_time_s": ..., "ivp_distance_m": ...}
"""

import json
import sys

from scipy.integrate import quad, solve_ivp


def main() -> int:
    m_eff, p_w, k, c, v0, v1 = (float(a) for a in sys.argv[1:7])

    def force(v: float) -> float:
        return p_w / v - k * v * v - c

    t_quad, _ = quad(lambda v: m_eff / force(v), v0, v1, epsabs=0.0, epsrel=1e-12, limit=200)
    x_quad, _ = quad(lambda v: m_eff * v / force(v), v0, v1, epsabs=0.0, epsrel=1e-12, limit=200)

    def rhs(_t, y):
        x, v = y
        return [v, force(v) / m_eff]

    def reached(_t, y):
        return y[1] - v1

    reached.terminal = True
    reached.direction = 1
    sol = solve_ivp(rhs, (0.0, 3600.0), [0.0, v0], method="DOP853", rtol=1e-12, atol=1e-10, events=reached)
    if sol.t_events[0].size != 1:
        print(f"solve_ivp never reached {v1} m/s: {sol.message}", file=sys.stderr)
        return 1
    t_ivp = float(sol.t_events[0][0])
    x_ivp = float(sol.y_events[0][0][0])

    for name, a, b in (("time", t_quad, t_ivp), ("distance", x_quad, x_ivp)):
        if abs(a / b - 1.0) > 1e-7:
            print(f"quad and solve_ivp disagree on {name}: {a} vs {b}", file=sys.stderr)
            return 1
    print(json.dumps({"time_s": t_quad, "distance_m": x_quad, "ivp_time_s": t_ivp, "ivp_distance_m": x_ivp}))
    return 0


if __name__ == "__main__":
    sys.exit(main())
