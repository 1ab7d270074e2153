"""The caution every comparison carries (its text and ``compare.json``)."""

CAUTION = ("Estimates only: confirm against measurements and component ratings; "
           "product-safety standards, local codes and qualified engineering review take "
           "precedence over these results.")
