"""Settings every test shares."""

import pytest


@pytest.fixture(autouse=True)
def _fast_password_hashing(settings):
    """Tests make many users; the default hasher is slow on purpose, MD5 is quick."""
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]
