"""HTTP plumbing between views and core: body parsing, the one problem+json error path, the
problem catalogue, the docs page, request -> core options, core result -> response, limits."""
