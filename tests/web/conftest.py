"""Fixtures for the web and database tests: users, roles, a small study."""

from __future__ import annotations

import copy

import pytest
from django.contrib.auth import get_user_model

from allocation import models as m
from allocation import services
from tests.core.conftest import HOME_HEATING


@pytest.fixture
def heating_document() -> dict:
    """The home-heating test study file (tests/core/conftest.py), a fresh copy per test."""
    return copy.deepcopy(HOME_HEATING)


def make_user(name: str):
    return get_user_model().objects.create_user(name, password="correct horse battery")


@pytest.fixture
def owner(db):
    return make_user("olive")


@pytest.fixture
def study(owner, heating_document) -> m.Study:
    return services.study_import(data=heating_document, owner=owner)


@pytest.fixture
def member_of(study):
    """Make a user with a role in ``study``: ``member_of("viewer")``."""

    def make(role: str, name: str | None = None):
        user = make_user(name or f"{role}-user")
        m.Membership.objects.create(study=study, user=user, role=role)
        return user

    return make
