# The upshot scoring service. Build: docker build -t upshot .
# Run (keys are required off loopback; make one with `upshot keys new`):
#   docker run -p 8000:8000 -e UPSHOT_API_KEYS='crm:scorer:<sha256>' \
#     -v "$PWD/models:/data/models" -v upshot-log:/data/log upshot
FROM python:3.11-slim

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1

RUN groupadd --system --gid 10001 upshot \
    && useradd --system --uid 10001 --gid upshot --home-dir /app --shell /usr/sbin/nologin upshot

WORKDIR /app
COPY pyproject.toml README.md ./
COPY service ./service
RUN pip install --no-cache-dir . \
    && rm -rf /root/.cache
COPY campaigns ./campaigns
RUN mkdir -p /data/models /data/log && chown -R upshot:upshot /data

# Configuration is by environment only; models and the decision log live on volumes.
# The compiled scoring kernels cache their machine code in NUMBA_CACHE_DIR: site-packages
# is not writable by the service user.
ENV UPSHOT_HOST=0.0.0.0 \
    UPSHOT_PORT=8000 \
    UPSHOT_MODELS_DIR=/data/models \
    UPSHOT_DECISION_LOG=/data/log/decisions.sqlite3 \
    UPSHOT_CAMPAIGNS_FILE=/app/campaigns/larkspur.toml \
    NUMBA_CACHE_DIR=/tmp/numba-cache
VOLUME ["/data/models", "/data/log"]

USER upshot
EXPOSE 8000
HEALTHCHECK --interval=15s --timeout=3s --start-period=60s --retries=3 \
    CMD python -c "import os, urllib.request; urllib.request.urlopen('http://127.0.0.1:%s/healthz' % os.environ.get('UPSHOT_PORT', '8000'), timeout=2)"

CMD ["upshot", "serve"]
