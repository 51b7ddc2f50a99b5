"""Settings every test shares."""

import pytest


@pytest.fixture(autouse=True)
def _fast_password_hashing(settings):
    """Tests make many users; the default hasher is slow on purpose, MD5 is quick."""
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture(autouse=True, scope="session")
def _partials_report_their_context():
    """The test client records each template rendered and its context, because Django's
    test set-up makes ``Template._render`` send ``template_rendered``. A partial rendered
    by name (``"page.html#region"``, ``{% partial %}``) is rendered by template_partials'
    proxy, which that set-up does not reach: it sends the same signal here, so
    ``response.context`` and ``response.templates`` hold for a fragment as for a page."""
    from django.test.signals import template_rendered
    from template_partials.templatetags.partials import TemplateProxy

    original = TemplateProxy._render

    def _render(self, context):
        template_rendered.send(sender=self, template=self, context=context)
        return original(self, context)

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(TemplateProxy, "_render", _render)
        yield
