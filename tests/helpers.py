"""Small spec builders shared by the tests."""

from __future__ import annotations

from layout import loads_spec
from layout.spec import Spec


def spec_from(design: str, *, extra: str = "", study: str = 'id = "T1"\ntitle = "Test"\nseed = 1') -> Spec:
    """A spec with one number response, from a [design] body and any extra tables."""
    text = f'[study]\n{study}\n\n[design]\n{design}\n\n{extra}\n\n[[response]]\nname = "y"\nkind = "number"\n'
    return loads_spec(text, "test.toml")
