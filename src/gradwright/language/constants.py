"""Bounds on exact constants as the reader builds them (`9**9**9` is refused before it is
computed): a part of the reader."""

from __future__ import annotations

from .. import expr as E


class ConstantChecks:
    """Mixed into the reader: the size checks of exact rational constants."""

    def check_constant_power(self, a, b, node):
        """Refuse `9**9**9` before computing it: exact powers grow by |k| times the bits."""
        from .parser import LIMITS

        if type(b) is not E.Const or b.value.denominator != 1:
            return
        k = b.value.numerator
        if type(a) is E.Const:
            base = a.value
            if base == 0 and k < 0:
                self.fail_node("division by zero (0 to a negative power)", node)
            if abs(base.numerator) <= 1 and base.denominator == 1:
                return  # 0, 1, -1: any power stays small
            bits = max(base.numerator.bit_length(), base.denominator.bit_length())
            if bits * abs(k) > LIMITS["constant_bits"]:
                self.fail_node(
                    "the constant is too large to compute exactly (more than "
                    f"{LIMITS['constant_bits']:,} bits); write a smaller power",
                    node,
                )
        elif abs(k).bit_length() > LIMITS["constant_bits"]:  # pragma: no cover - literal bound
            self.fail_node("the exponent is too large", node)

    def check_constant_size(self, out, node):
        """Exact constants stay below LIMITS['constant_bits'] (and so stay printable)."""
        from .parser import LIMITS

        consts = [out] if type(out) is E.Const else [c for c in out.args if type(c) is E.Const]
        for c in consts:
            v = c.value
            if v and v.numerator.bit_length() - v.denominator.bit_length() > 1024:
                # the generated code computes in float64, whose largest value is about 1.8e308
                self.fail_node(
                    "the constant is larger than the largest float64 (about 1.8e308)", node
                )
            if max(v.numerator.bit_length(), v.denominator.bit_length()) > LIMITS["constant_bits"]:
                self.fail_node(
                    "the constant is too large to compute exactly (more than "
                    f"{LIMITS['constant_bits']:,} bits, about "
                    f"{LIMITS['constant_bits'] * 3 // 10:,} digits)",
                    node,
                )
