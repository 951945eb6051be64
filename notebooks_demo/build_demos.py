"""Write the demo notebooks of notebooks_demo/ (no outputs), one per scenario.

Run `python notebooks_demo/build_demos.py` after editing; the notebooks are committed as written
here so that they stay reproducible. Every number in them is invented (seeded random data).
"""

from __future__ import annotations

from pathlib import Path

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

HERE = Path(__file__).resolve().parent

SOIL = [
    (
        "md",
        """# Soil-moisture probes: fitting their covariance

A field station has logged `days` days of volumetric soil-moisture readings from `n` probes
buried along a slope. Neighbouring probes move together after rain, so the readings are
correlated. We fit the probes' covariance `S` (symmetric positive definite) by minimizing the
Gaussian negative log-likelihood of the centred readings `Z`, derive its gradient with
gradwright, check it, and compare the optimizer's answer with the closed-form stationary point.""",
    ),
    (
        "code",
        """import numpy as np
from IPython.display import Math
from scipy import optimize

%load_ext gradwright""",
    ),
    (
        "code",
        """# Invented data: 6 probes, 240 days; covariance decays with distance along the slope.
rng = np.random.default_rng(2031)
n_probes, n_days = 6, 240
depth_m = np.linspace(0.0, 2.5, n_probes)
gap = np.abs(depth_m[:, None] - depth_m[None, :])
true_cov = 0.04 * np.exp(-gap / 0.9) + 0.002 * np.eye(n_probes)
readings = rng.multivariate_normal(np.full(n_probes, 0.31), true_cov, size=n_days)
Z = readings - readings.mean(axis=0)
days = float(n_days)
Z.shape""",
    ),
    ("md", "The negative log-likelihood, up to constants, with `S` as the variable:"),
    (
        "code",
        """%%derive S
Z: (m, n)          # centred readings, one row per day
S: (n, n) spd      # covariance of the probes
days: ()           # number of days
nll = days * logdet(S) + trace(solve(S, Z.T @ Z))""",
    ),
    (
        "md",
        """The check panel above compares `grad_nll` with finite differences on random inputs that
honour the declared structure (`S` is drawn symmetric positive definite). Run it from code too:""",
    ),
    ("code", """print(nll_check.run().summary())"""),
    (
        "md",
        """### The fit

An optimizer moving freely over `S` can step out of the positive definite matrices, so we
optimize over a factor `L` with `S = L Lᵀ`; gradwright applies the chain rule through the
definition.""",
    ),
    (
        "code",
        """%%derive L --name nll_factor --show result --no-check
Z: (m, n)
L: (n, n)
days: ()
S = L @ L.T
nll = days * logdet(S) + trace(solve(S, Z.T @ Z))""",
    ),
    (
        "code",
        """x0 = nll_factor_pack(L=np.eye(n_probes) * 0.1)


def objective(flat):
    return nll_factor_objective(flat, Z=Z, days=days)


fit = optimize.minimize(objective, x0, jac=True, method="L-BFGS-B",
                        options={"maxiter": 5000, "gtol": 1e-9, "ftol": 1e-15})
L_fit = nll_factor_unpack(fit.x)
S_fit = L_fit @ L_fit.T
print(fit.message, "after", fit.nit, "iterations")""",
    ),
    (
        "md",
        """### Against the closed form

Setting the gradient to zero gives the sample covariance `S = Zᵀ Z / days` (the maximum-likelihood
covariance of a Gaussian sample, e.g. Anderson, *An Introduction to Multivariate Statistical
Analysis*). gradwright finds it from the derivation:""",
    ),
    (
        "code",
        """closed = nll_derivation.stationary_point("S")
display(Math(closed.latex()))
S_closed = closed.function()(Z=Z, days=days)
print("largest difference, optimizer vs closed form:", np.max(np.abs(S_fit - S_closed)))
print("closed form vs Z.T @ Z / days:", np.max(np.abs(S_closed - Z.T @ Z / days)))
print("gradient at the closed form:", np.max(np.abs(grad_nll(Z=Z, S=S_closed, days=days))))""",
    ),
    (
        "md",
        """### The identities behind it

The catalogue, searched for the log-determinant; the toggle lists the identities that apply to
the last target.""",
    ),
    ("code", "%identities logdet"),
]

DEMAND = [
    (
        "md",
        """# Store × week demand: a low-rank factorization

A grocery chain keeps a table `P` of weekly demand for one product line, stores by weeks. We
approximate it by `U Vᵀ` — store factors times week factors — with a penalty `mu` on their size,
derive both gradients, and fit the factors with `scipy.optimize`, first by alternating steps and
then jointly.""",
    ),
    (
        "code",
        """import numpy as np
from scipy import optimize

%load_ext gradwright""",
    ),
    (
        "code",
        """# Invented data: 9 stores, 16 weeks; store size, a seasonal wave and a promotion.
rng = np.random.default_rng(7)
n_stores, n_weeks, rank = 9, 16, 3
size = rng.uniform(0.6, 1.8, n_stores)
season = 1.0 + 0.3 * np.sin(np.linspace(0, 2 * np.pi, n_weeks))
promo = np.zeros(n_weeks)
promo[[4, 5, 11]] = 1.0
urban = rng.uniform(0, 1, n_stores)
P = np.outer(size, season) + 0.4 * np.outer(urban, promo)
P = P + rng.normal(0, 0.03, (n_stores, n_weeks))
mu = 0.05""",
    ),
    (
        "code",
        """%%derive U V
P: (s, w)          # demand, stores x weeks
U: (s, r)          # store factors
V: (w, r)          # week factors
mu: ()             # penalty weight
R = P - U @ V.T
loss = sum(R**2) + mu * (sum(U**2) + sum(V**2))""",
    ),
    ("code", """print(loss_check.run().summary())"""),
    (
        "md",
        """### Alternating steps

Hold `V` and minimize over `U`, then the other way round, each with L-BFGS using one part of the
gradient tuple `grad_loss`.""",
    ),
    (
        "code",
        """U = rng.normal(0, 0.1, (n_stores, rank))
V = rng.normal(0, 0.1, (n_weeks, rank))

def over_U(flat, V):
    U_ = flat.reshape(n_stores, rank)
    return loss(P=P, U=U_, V=V, mu=mu), grad_loss(P=P, U=U_, V=V, mu=mu)[0].ravel()

def over_V(flat, U):
    V_ = flat.reshape(n_weeks, rank)
    return loss(P=P, U=U, V=V_, mu=mu), grad_loss(P=P, U=U, V=V_, mu=mu)[1].ravel()

history = []
for _ in range(12):
    step = optimize.minimize(over_U, U.ravel(), args=(V,), jac=True, method="L-BFGS-B")
    U = step.x.reshape(n_stores, rank)
    step = optimize.minimize(over_V, V.ravel(), args=(U,), jac=True, method="L-BFGS-B")
    V = step.x.reshape(n_weeks, rank)
    history.append(loss(P=P, U=U, V=V, mu=mu))
print("loss after each sweep:", np.round(history, 6))""",
    ),
    (
        "md",
        """### Jointly, with the packed objective

`loss_pack` lays `U` and `V` end to end in one vector, `loss_objective` returns the value and
the flat gradient, `loss_unpack` takes the answer apart again.""",
    ),
    (
        "code",
        """x0 = loss_pack(U=U, V=V)
fit = optimize.minimize(lambda x: loss_objective(x, P=P, mu=mu), x0, jac=True, method="L-BFGS-B",
                        options={"maxiter": 5000, "gtol": 1e-10, "ftol": 1e-15})
U_fit, V_fit = loss_unpack(fit.x)
print(fit.message, "loss", fit.fun)""",
    ),
    (
        "md",
        """A check from outside: at a minimum of this penalized problem the product `U Vᵀ` keeps
the top singular vectors of `P` with each singular value shrunk by `mu` (the variational form of the
nuclear norm, from memory; common practice in matrix completion).""",
    ),
    (
        "code",
        """sigma = np.linalg.svd(P, compute_uv=False)[:rank]
shrunk = np.linalg.svd(U_fit @ V_fit.T, compute_uv=False)[:rank]
print("singular values of P minus mu:", np.round(sigma - mu, 6))
print("singular values of U V^T     :", np.round(shrunk, 6))
print("largest gap:", np.max(np.abs(shrunk - (sigma - mu))))""",
    ),
]

BRIDGE = [
    (
        "md",
        """# Bridge strain gauges: generalized least squares

A footbridge has `g` strain gauges. In each of `k` calibration runs a test truck parks at a
known load configuration `X` (axle loads at `p` positions) and the gauges are read (`Y`). The
runs are done in sequence, and slow thermal drift makes the noise of consecutive runs
correlated with a known covariance `S`. We fit the load-to-strain map `B` by generalized least
squares, derive the gradient, find the stationary point in closed form and confirm it against
`scipy.linalg.lstsq` on whitened data.""",
    ),
    (
        "code",
        """import numpy as np
from IPython.display import Math
from scipy import linalg, optimize

%load_ext gradwright""",
    ),
    (
        "code",
        """# Invented data: 40 runs, 3 load positions, 5 gauges; drift correlation 0.8 between runs.
rng = np.random.default_rng(1913)
k, p, g = 40, 3, 5
X = rng.uniform(0.0, 12.0, (k, p))                   # axle loads in tonnes
B_true = rng.normal(0.0, 8.0, (p, g))                # microstrain per tonne
lags = np.abs(np.arange(k)[:, None] - np.arange(k)[None, :])
S = 4.0 * 0.8 ** lags                                # AR(1)-like drift covariance
noise = linalg.cholesky(S, lower=True) @ rng.normal(size=(k, g))
Y = X @ B_true + noise""",
    ),
    (
        "code",
        """%%derive B --name gls
Y: (k, g)          # gauge readings, one row per run
X: (k, p)          # load configuration of each run
B: (p, g)          # load-to-strain map
S: (k, k) spd      # noise covariance between runs
E = Y - X @ B
misfit = trace(E.T @ solve(S, E))""",
    ),
    ("code", """print(gls_check.run().summary())"""),
    ("md", "### Fit with the derived gradient"),
    (
        "code",
        """start = gls_pack(B=np.zeros((p, g)))
# The misfit is quadratic in B: nonlinear conjugate gradients finish in a few iterations.
fit = optimize.minimize(lambda b: gls_objective(b, Y=Y, X=X, S=S), start, jac=True, method="CG")
B_fit = gls_unpack(fit.x)
print(fit.message, "after", fit.nit, "iterations")""",
    ),
    (
        "md",
        """### Closed form, and a check from outside

The stationary point is Aitken's estimator `B = (Xᵀ S⁻¹ X)⁻¹ Xᵀ S⁻¹ Y` (Aitken, 1935). The same
estimate is ordinary least squares after whitening with the Cholesky factor of `S`, which
`scipy.linalg.lstsq` solves independently of gradwright.""",
    ),
    (
        "code",
        """closed = gls_derivation.stationary_point("B")
display(Math(closed.latex()))
B_closed = closed.function()(Y=Y, X=X, S=S)
C = linalg.cholesky(S, lower=True)
B_whitened = linalg.lstsq(linalg.solve_triangular(C, X, lower=True),
                          linalg.solve_triangular(C, Y, lower=True))[0]
print("closed form vs whitened lstsq:", np.max(np.abs(B_closed - B_whitened)))
print("optimizer vs closed form     :", np.max(np.abs(B_fit - B_closed)))""",
    ),
]

ROBOT = [
    (
        "md",
        """# Warehouse robot arm: Jacobians of a small two-layer map

A picking arm turns `j` joint-encoder readings `x` into `o` grip signals through a small
two-layer map `tanh(W2 tanh(W1 x))`. We derive the Jacobians of the grip signal with respect to
both weight matrices, compare the generated vector-Jacobian product with the dense Jacobian on
small sizes, and then use the VJP to fit the weights to logged grips.""",
    ),
    (
        "code",
        """import numpy as np
from scipy import optimize

%load_ext gradwright""",
    ),
    (
        "code",
        """%%derive W1 W2
x: (j,)            # joint readings
W1: (h, j)         # first layer
W2: (o, h)         # second layer
grip = tanh(W2 @ tanh(W1 @ x))""",
    ),
    ("code", """print(grip_check.run().summary())"""),
    (
        "md",
        """### The VJP against the dense Jacobian

`jacobian_grip` builds the dense Jacobians over column-major `vec W` (fine at these sizes);
`vjp_grip` applies their transposes without building them.""",
    ),
    (
        "code",
        """# Invented arm: 4 joints, 6 hidden units, 2 grip signals.
rng = np.random.default_rng(424)
j, h, o = 4, 6, 2
W1 = rng.normal(0, 0.6, (h, j))
W2 = rng.normal(0, 0.6, (o, h))
x = rng.uniform(-1, 1, j)
G = rng.normal(size=o)
J1, J2 = jacobian_grip(x=x, W1=W1, W2=W2)
v1, v2 = vjp_grip(G, x=x, W1=W1, W2=W2)
print("Jacobian shapes:", J1.shape, J2.shape)
print("W1 part, VJP vs dense:", np.max(np.abs(v1 - (J1.T @ G).reshape(W1.shape, order="F"))))
print("W2 part, VJP vs dense:", np.max(np.abs(v2 - (J2.T @ G).reshape(W2.shape, order="F"))))""",
    ),
    (
        "md",
        """### Fitting the weights to logged grips

Sixty logged poses with the grip the operator applied. The squared error summed over poses has
the gradient `Σ VJP(2 (grip − target))`, assembled from the generated VJP.""",
    ),
    (
        "code",
        """poses = rng.uniform(-1, 1, (60, j))
W1_true, W2_true = rng.normal(0, 0.8, (h, j)), rng.normal(0, 0.8, (o, h))
targets = np.array([grip(x=q, W1=W1_true, W2=W2_true) for q in poses])
grip_pack(W1=W1, W2=W2)  # records the shapes for grip_unpack

def squared_error(flat):
    A, Bm = grip_unpack(flat)
    value, g1, g2 = 0.0, np.zeros_like(A), np.zeros_like(Bm)
    for q, t in zip(poses, targets):
        r = grip(x=q, W1=A, W2=Bm) - t
        value += r @ r
        d1, d2 = vjp_grip(2 * r, x=q, W1=A, W2=Bm)
        g1 += d1
        g2 += d2
    return value, np.concatenate([g1.ravel(), g2.ravel()])

err = optimize.check_grad(lambda f: squared_error(f)[0], lambda f: squared_error(f)[1],
                          grip_pack(W1=W1, W2=W2))
print("scipy.optimize.check_grad on the summed VJP:", err)
fit = optimize.minimize(squared_error, grip_pack(W1=W1, W2=W2), jac=True, method="L-BFGS-B",
                        options={"maxiter": 300})
print("squared error before:", squared_error(grip_pack(W1=W1, W2=W2))[0], "after:", fit.fun)""",
    ),
]

FERRY = [
    (
        "md",
        """# Ferry ticket classes: a multinomial logit, from derivative to standard errors

A coastal ferry line sells four ticket classes: deck, saloon, cabin and lounge. For each of
`n` passengers we know the trip length, how far the fare sat from its usual level, the size of
the travelling group and whether the crossing ran at night. We model the class chosen by a
multinomial logit with deck as the base class: a weight matrix `W` (features by the three other
classes) and an intercept per class `b`. gradwright derives the gradient, the check panel tests
it, SciPy fits the model with the block Hessian over `W` and `b` together, and the standard errors
come from that Hessian; a reference statistics library fits the same invented data.""",
    ),
    (
        "code",
        """import numpy as np
import statsmodels.api as sm
from IPython.display import Math
from scipy import optimize

%load_ext gradwright""",
    ),
    (
        "code",
        """# Invented data: 600 passengers, standardized features.
rng = np.random.default_rng(1907)
n_passengers = 600
classes = ["deck", "saloon", "cabin", "lounge"]
trip_hours = rng.uniform(0.5, 6.0, n_passengers)
fare_gap = rng.normal(0.0, 1.0, n_passengers)
group_size = rng.integers(1, 6, n_passengers).astype(float)
night = rng.integers(0, 2, n_passengers).astype(float)
X = np.column_stack([trip_hours, fare_gap, group_size, night])
X = (X - X.mean(axis=0)) / X.std(axis=0)
true_W = np.array([[0.2, 0.9, 0.6], [-0.5, -0.8, -1.1], [0.3, -0.2, -0.6], [0.1, 1.2, 0.4]])
true_b = np.array([0.4, -0.9, -1.3])
logits = np.column_stack([np.zeros(n_passengers), X @ true_W + true_b])
prob = np.exp(logits - logits.max(axis=1, keepdims=True))
prob /= prob.sum(axis=1, keepdims=True)
choice = np.array([rng.choice(4, p=row) for row in prob])
Y = np.eye(4)[choice][:, 1:]  # one-hot, the base class dropped
dict(zip(classes, np.bincount(choice)))""",
    ),
    (
        "md",
        """The negative log-likelihood: each passenger contributes the log of the normalizer
`1 + Σ exp(z)` over the non-base classes, minus the logit of the class chosen.""",
    ),
    (
        "code",
        """%%derive W b
X: (n, p)          # features, one row per passenger
Y: (n, k)          # the class chosen, one-hot without the base class
W: (p, k)          # weights
b: (k,)            # intercepts
Z = X @ W + b
nll = sum(log(1 + exp(Z) @ ones(k))) - sum(Y * Z)""",
    ),
    (
        "md",
        """The check panel compares `grad_nll` with finite differences at random inputs:""",
    ),
    ("code", """print(nll_check.run().summary())"""),
    (
        "md",
        """### The fit

`objective` packs `W` (column by column) and `b` into one vector; the constants come
positionally, as `minimize(..., args=(X, Y))` passes them. `obj.hess` is the dense block Hessian
over that vector, the cross block between `W` and `b` included.""",
    ),
    (
        "code",
        """obj = nll_derivation.objective(args=("X", "Y"))
x0 = obj.pack(W=np.zeros((4, 3)), b=np.zeros(3))
print(obj.describe())
fit = optimize.minimize(obj, x0, args=(X, Y), jac=True, hess=obj.hess, method="trust-exact")
estimate = obj.unpack(fit.x)
print(fit.message, "after", fit.nit, "iterations")
estimate""",
    ),
    ("md", "The mixed second derivative that couples the two parameter groups:"),
    ("code", """Math(nll_derivation.second_derivative("W", "b").latex())"""),
    (
        "md",
        """### Standard errors

At the minimum of a negative log-likelihood, the inverse of the Hessian estimates the covariance
of the estimates; the standard errors are the square roots of its diagonal, shaped like the
variables.""",
    ),
    (
        "code",
        """se = nll_derivation.standard_errors(X=X, Y=Y, **estimate)
se""",
    ),
    (
        "md",
        """### Against a reference library

statsmodels' `MNLogit` on the same data, with an intercept column first (so its first row holds
the intercepts):""",
    ),
    (
        "code",
        """reference = sm.MNLogit(choice, sm.add_constant(X)).fit(method="newton", disp=0)
params, bse = np.asarray(reference.params), np.asarray(reference.bse)
print("largest difference in W:", np.max(np.abs(estimate["W"] - params[1:])))
print("largest difference in b:", np.max(np.abs(estimate["b"] - params[0])))
print("largest difference in the standard errors of W:", np.max(np.abs(se["W"] - bse[1:])))
print("largest difference in the standard errors of b:", np.max(np.abs(se["b"] - bse[0])))""",
    ),
    (
        "md",
        """The fitted probabilities at the estimate, read from the definitions of the block:""",
    ),
    (
        "code",
        """values = nll_derivation.values(X=X, Y=Y, **estimate)
Z_fit = np.column_stack([np.zeros(n_passengers), values["Z"]])
fitted = np.exp(Z_fit) / np.exp(Z_fit).sum(axis=1, keepdims=True)
dict(zip(classes, fitted.mean(axis=0).round(3)))""",
    ),
]

ANTENNA = [
    (
        "md",
        """# A greenhouse antenna array: channel estimation and a Wiener combiner

Eight antennas on a greenhouse roof receive complex baseband snapshots from four soil-sensor
transmitters buried between the rows. Each transmitter sends known pilot symbols; from the
snapshots `Y` we estimate the complex channel `H` by least squares, then build a Wiener combiner
that recovers one sensor's symbols from the Hermitian covariance of the snapshots.

gradwright derives the Wirtinger gradients. For a real loss of a complex variable `Z` it reports
`G = ∂f/∂Re Z + i ∂f/∂Im Z = 2 ∂f/∂Z̄`, so that `df = Re tr(Gᴴ dZ)` and `Z ← Z − step·G`
descends.""",
    ),
    (
        "code",
        """import numpy as np
from scipy import optimize

%load_ext gradwright""",
    ),
    (
        "code",
        """# Invented data: 8 antennas, 4 transmitters, 60 pilot snapshots (QPSK pilots).
rng = np.random.default_rng(4417)
n_antennas, n_sensors, n_snapshots = 8, 4, 60
qpsk = np.array([1 + 1j, 1 - 1j, -1 + 1j, -1 - 1j]) / np.sqrt(2)
X = rng.choice(qpsk, size=(n_sensors, n_snapshots))
H_true = (rng.standard_normal((n_antennas, n_sensors))
          + 1j * rng.standard_normal((n_antennas, n_sensors))) / np.sqrt(2)
noise = 0.1 * (rng.standard_normal((n_antennas, n_snapshots))
               + 1j * rng.standard_normal((n_antennas, n_snapshots))) / np.sqrt(2)
Y = H_true @ X + noise
Y.shape, X.shape""",
    ),
    ("md", "The least-squares loss of the channel, with `H` as the (complex) variable:"),
    (
        "code",
        """%%derive H
Y: (a, k) complex     # received snapshots, antennas x snapshots
H: (a, t) complex     # channel, antennas x transmitters
X: (t, k) complex     # known pilot symbols
loss = norm(Y - H @ X)**2""",
    ),
    (
        "md",
        """The derivation keeps `dH` and `conj(dH)` apart, then uses that the loss is real to read
off the gradient. The check panel moves `H` along real and imaginary directions (the complex step
needs a real function of real inputs, so it is not offered here). From code:""",
    ),
    ("code", """print(loss_check.run().summary())"""),
    (
        "md",
        """### The estimate: closed form and optimizer agree

The gradient is affine in `H` alone, so "gradient = 0" has a closed form; an optimizer over the
real and imaginary parts (`loss_pack` stacks them) finds the same channel.""",
    ),
    (
        "code",
        """point = loss_derivation.stationary_point("H")
print(point.text())
H_closed = point.function()(Y=Y, X=X)
result = optimize.minimize(
    lambda flat: loss_objective(flat, Y=Y, X=X),
    loss_pack(H=np.zeros((n_antennas, n_sensors), complex)),
    jac=True,
    method="L-BFGS-B",
)
H_fit = loss_unpack(result.x)
print("optimizer vs closed form:", np.max(np.abs(H_fit - H_closed)))
print("closed form vs truth:    ", np.max(np.abs(H_closed - H_true)))""",
    ),
    (
        "md",
        """### A Wiener combiner for sensor 1

The combiner `w` estimates sensor 1's symbol `s` from a snapshot `y` as `wᴴ y`. Its mean square
error uses the snapshots' covariance `R` (Hermitian positive definite) and their correlation `p`
with the pilots; `w.conj() @ R @ w` is real because `R` is Hermitian, and gradwright proves it.""",
    ),
    (
        "code",
        """R = Y @ Y.conj().T / n_snapshots
p = Y @ X[0].conj() / n_snapshots
s2 = float(np.mean(np.abs(X[0]) ** 2))""",
    ),
    (
        "code",
        """%%derive w --no-check
R: (a, a) hpd       # covariance of the snapshots
p: (a,) complex     # correlation with sensor 1's pilots
w: (a,) complex     # combiner weights
s2: ()              # power of the pilots
mse = s2 - 2 * real(vdot(w, p)) + w.conj() @ R @ w""",
    ),
    (
        "code",
        """wiener = mse_derivation.stationary_point("w")
print(wiener.text())
w_star = wiener.function()(R=R, p=p)
print("gradient at the solution:", np.max(np.abs(grad_mse(R=R, p=p, w=w_star, s2=s2))))
print("symbol error rate:", np.mean(np.sign((w_star.conj() @ Y).real) != np.sign(X[0].real)))""",
    ),
]

DEMOS = {
    "soil_moisture_covariance.ipynb": SOIL,
    "store_week_demand.ipynb": DEMAND,
    "bridge_strain_gls.ipynb": BRIDGE,
    "robot_arm_jacobians.ipynb": ROBOT,
    "ferry_ticket_choice.ipynb": FERRY,
    "greenhouse_antenna_array.ipynb": ANTENNA,
}


def build(cells) -> nbformat.NotebookNode:
    nb = new_notebook()
    nb.metadata = {
        "kernelspec": {
            "display_name": "Python 3 (ipykernel)",
            "language": "python",
            "name": "python3",
        },
        "language_info": {"name": "python"},
    }
    for i, (kind, source) in enumerate(cells, start=1):
        cell = new_markdown_cell(source) if kind == "md" else new_code_cell(source)
        cell.id = f"cell-{i:02d}"
        nb.cells.append(cell)
    return nb


def main() -> None:
    for name, cells in DEMOS.items():
        nbformat.write(build(cells), HERE / name)
        print("wrote", HERE / name)


if __name__ == "__main__":
    main()
