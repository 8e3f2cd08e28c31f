# Curvewise server image: slim Python, pinned runtime dependencies, non-root, gunicorn via `curvewise serve`.
# Build:  docker build -t curvewise .      Run:  docker run -p 8000:8000 curvewise
# Put a buffering reverse proxy (e.g. nginx) in front of it for untrusted clients; see docs/operations.md.

FROM python:3.11.7-slim-bookworm AS build
ENV PIP_NO_CACHE_DIR=1 PIP_DISABLE_PIP_VERSION_CHECK=1
WORKDIR /src
COPY pyproject.toml README.md ./
COPY service ./service
COPY schemas ./schemas
RUN pip wheel --no-deps --wheel-dir /wheels .

FROM python:3.11.7-slim-bookworm
ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1 \
    OPENBLAS_NUM_THREADS=1 \
    OMP_NUM_THREADS=1 \
    MKL_NUM_THREADS=1 \
    MPLBACKEND=Agg \
    MPLCONFIGDIR=/tmp/matplotlib \
    CURVEWISE_HOST=0.0.0.0 \
    CURVEWISE_PORT=8000
RUN groupadd --system --gid 10001 curvewise \
    && useradd --system --uid 10001 --gid curvewise --no-create-home --shell /usr/sbin/nologin curvewise
WORKDIR /app
COPY requirements.lock ./
RUN pip install --no-cache-dir --requirement requirements.lock
COPY --from=build /wheels /wheels
RUN pip install --no-cache-dir --no-deps /wheels/*.whl && rm -rf /wheels
# Compile the numerical kernels at build time (numba caches machine code; a host with another
# CPU model recompiles once into the same directory, so it stays writable for the server).
ENV NUMBA_CACHE_DIR=/app/.numba-cache
RUN python -c "from service.core.compiled.warmup import warm_up; warm_up()" \
    && chown -R 10001:10001 /app/.numba-cache
USER 10001:10001
EXPOSE 8000
HEALTHCHECK --interval=30s --timeout=5s --start-period=15s --retries=3 \
    CMD ["python", "-c", "import os, urllib.request as u; u.urlopen('http://127.0.0.1:%s/healthz' % os.environ.get('CURVEWISE_PORT', '8000'), timeout=4)"]
STOPSIGNAL SIGTERM
CMD ["curvewise", "serve"]
