"""HTTP routes of the service, all under ``/v1`` (see :mod:`service.api.router`)."""
