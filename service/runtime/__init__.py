"""Running the service as a process: configuration, the gunicorn server, guards, auth and CORS,
metrics and logs."""
