"""The cautions shown in the README, on every analysis page and in every export."""

__all__ = ["CAUTIONS"]

CAUTIONS = (
    "Baton supports human-factors analysis; it does not replace usability engineering with "
    "representative users (IEC 62366-1), risk management (ISO 14971), clinical judgement, or "
    "the applicable regulations and local codes. Its figures are model estimates under stated "
    "assumptions. It gives no treatment or dosing advice. Example studies are invented."
)
