"""The functions a derivation hands out: the generated value, gradient, jvp, vjp, Jacobian,
hvp and Hessian functions, the closed-form stationary point and the fitting glue (the
machinery lives in fitting.py and calculus/hessian.py); mixed into `Derivation`."""

from __future__ import annotations


class DerivationFunctions:
    """Mixed into `Derivation`: needs `_fn`, `_check_var`, `gradient`, `variables`."""

    def function(self):
        """f(**arrays) -> the value of the target."""
        return self._fn("value")

    def gradient_function(self, *vars_: str):
        """g(**arrays) -> the gradient (a tuple in wrt order for several variables)."""
        if not self.is_scalar:
            self.gradient(vars_[0] if vars_ else None)  # raises the explanatory error
        if len(vars_) == 1 and isinstance(vars_[0], (list, tuple)):
            vars_ = tuple(vars_[0])
        if not vars_:
            vars_ = self.variables
        names = [self._check_var(v) for v in vars_]
        if len(names) == 1:
            return self._fn(f"gradient_{names[0]}")
        fns = [self._fn(f"gradient_{v}") for v in names]
        if tuple(names) == self.variables:
            both = self._fn("value_and_gradient")

            def gradients(**arrays):
                return both(**arrays)[1]

        else:

            def gradients(**arrays):
                return tuple(f(**arrays) for f in fns)

        gradients.__doc__ = f"The gradients of {self.target} with respect to {', '.join(names)}."
        gradients.__name__ = "gradients"
        return gradients

    def value_and_gradient_function(self):
        """vg(**arrays) -> (value, gradient or tuple of gradients), sharing subexpressions."""
        if not self.is_scalar:
            self.gradient(None)
        return self._fn("value_and_gradient")

    def jvp_function(self, var: str | None = None):
        return self._fn(f"jvp_{self._check_var(var)}")

    def vjp_function(self, var: str | None = None):
        return self._fn(f"vjp_{self._check_var(var)}")

    def jacobian_function(self, var: str | None = None):
        return self._fn(f"jacobian_{self._check_var(var)}")

    def hvp_function(self, *vars_: str, var: str | None = None):
        """hvp(V, **arrays): one variable as today (V shaped like it); with no variable named
        and several in the derivation, or several named, V and the result are packed vectors
        (the layout of `objective()`), cross blocks included."""
        from .fitting import packed_hvp_function

        return self._second_order("hvp", packed_hvp_function, vars_, var)

    def hessian_function(self, *vars_: str, var: str | None = None):
        """h(**arrays): the dense Hessian over column-major vec X for one variable; with no
        variable named and several in the derivation, or several named, one matrix over the
        packed vector (the layout of `objective()`), cross blocks included."""
        from .fitting import packed_hessian_function

        return self._second_order("hessian", packed_hessian_function, vars_, var)

    def _second_order(self, kind: str, packed, vars_: tuple, var: str | None):
        """The generated `{kind}_{v}` of one variable, or `packed(self, names)` over several."""
        if len(vars_) == 1 and isinstance(vars_[0], (list, tuple)):
            vars_ = tuple(vars_[0])
        if var is None and (len(vars_) > 1 or (not vars_ and len(self.variables) > 1)):
            return packed(self, vars_ or self.variables)
        v = self._check_var(var if var is not None else (vars_[0] if vars_ else None))
        if not self.is_scalar:
            self.gradient(v)
        return self._fn(f"{kind}_{v}")

    def stationary_point(self, var: str | None = None):
        """The closed-form solution of 'gradient = 0' where one exists."""
        from .calculus.stationary import stationary_point

        v = self._check_var(var)
        return stationary_point(self, v)

    # --- fitting (the machinery lives in fitting.py and calculus/hessian.py) --------------------

    def _block_hvp(self):
        if "_block_hvp_fn" not in self.__dict__:
            from .calculus.hessian import block_hvp_function

            if not self.is_scalar:
                self.gradient(self.variables[0])
            self._block_hvp_fn = block_hvp_function(self)
        return self._block_hvp_fn

    def objective(self, *, args=(), **constants):
        """The optimizer objective over the packed variables: `obj(flat, *args)` returns
        `(value, packed gradient)`; `obj.hess`, `obj.hessp`, `obj.pack`, `obj.unpack`.
        Constants are given here by name, or named in `args` and passed positionally after
        the vector (as `scipy.optimize.minimize(obj, x0, args=(X, y), jac=True)` does)."""
        from .fitting import Objective

        return Objective(self, args, constants)

    def second_derivative(self, first: str, second: str):
        """The mixed second derivative of a scalar target in `first` and `second`:
        d(∂f/∂first) along d(second), and its Kronecker form when one exists (`.latex()`)."""
        from .calculus.hessian import mixed_derivative

        first, second = self._check_var(first), self._check_var(second)
        if not self.is_scalar:
            self.gradient(first)
        return mixed_derivative(self, first, second)

    def values(self, **arrays) -> dict:
        """{definition: value} for every definition of the block and the target, sharing work."""
        if "_values_fn" not in self.__dict__:
            from .fitting import values_function

            self._values_fn = values_function(self)
        return self._values_fn(**arrays)

    def standard_errors(self, **arrays) -> dict:
        """For a negative log-likelihood target at its minimum: {variable: standard errors
        shaped like the variable}, the square roots of the diagonal of the inverse block
        Hessian over the packed variables. Raises FormulaError if the Hessian is not positive
        definite there."""
        from .fitting import standard_errors

        if not self.is_scalar:
            self.gradient(self.variables[0])
        return standard_errors(self, arrays)
