"""The report tests use the precomputed forms of the supnorm tests."""

from tests.supnorm.conftest import forms_by_level, level1_form, supnorm_forms  # noqa: F401
