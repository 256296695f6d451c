# calcsvc: the API under gunicorn. Build: docker build -t calcsvc .
# Run:   docker run -p 8000:8000 -v calcsvc-data:/data calcsvc
# A patch-level tag, so a rebuild gets the same interpreter; bump it deliberately for security fixes.
FROM python:3.11.11-slim-bookworm

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1

# Dependencies in their own layer: it is rebuilt only when pyproject.toml or the constraints change,
# not on every source edit. The list comes from pyproject.toml; constraints.txt pins each version.
WORKDIR /src
COPY pyproject.toml constraints.txt ./
RUN python -c "import tomllib; print('\n'.join(tomllib.load(open('pyproject.toml', 'rb'))['project']['dependencies']))" \
        > /tmp/requirements.txt \
    && pip install -c constraints.txt -r /tmp/requirements.txt \
    && rm /tmp/requirements.txt

# The package itself, without dependencies (they are above). README.md is the package's long description.
COPY README.md ./
COPY calcsvc ./calcsvc
RUN pip install --no-deps /src && rm -rf /src/build /src/*.egg-info

# Unprivileged user; /data is its only writable place, for the default SQLite database.
RUN groupadd --system --gid 10001 calcsvc \
    && useradd --system --uid 10001 --gid calcsvc --home-dir /nonexistent --no-create-home --shell /usr/sbin/nologin calcsvc \
    && mkdir /data \
    && chown calcsvc:calcsvc /data

WORKDIR /app
COPY seed_parts ./seed_parts
COPY --chmod=0755 deploy/entrypoint.sh /usr/local/bin/calcsvc-entrypoint

ENV CALCSVC_SEED_DIR=/app/seed_parts \
    MPLCONFIGDIR=/tmp/matplotlib \
    DATABASE_URL=sqlite:////data/calcsvc.sqlite \
    HOST=0.0.0.0 \
    PORT=8000

VOLUME ["/data"]
EXPOSE 8000
USER 10001:10001

# slim has no curl; urlopen raises (exit 1) on a refused connection or a non-2xx answer.
HEALTHCHECK --interval=30s --timeout=5s --start-period=30s --retries=3 \
    CMD ["python", "-c", "import os, urllib.request as u; u.urlopen('http://127.0.0.1:%s/healthz' % os.environ.get('PORT', '8000'), timeout=4)"]

ENTRYPOINT ["/usr/local/bin/calcsvc-entrypoint"]
