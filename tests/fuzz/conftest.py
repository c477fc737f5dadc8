from tests.integration.conftest import server  # noqa: F401 - the real gunicorn fixture
