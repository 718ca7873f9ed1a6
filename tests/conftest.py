"""Suite-wide collection order."""


def pytest_collection_modifyitems(session, config, items):
    """Run the browser tests last.

    Playwright's synchronous API keeps an asyncio loop running in the main thread for the
    whole browser session; a Workbench created while it runs would take it for a kernel's
    loop and defer its updates.  Running those tests after everything else keeps the
    headless widget tests in the plain-script situation they describe.
    """
    items.sort(key=lambda item: item.get_closest_marker("browser") is not None or "browser" in item.path.parts)
