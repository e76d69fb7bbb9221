# syntax=docker/dockerfile:1
# Multi-stage image: build (compilers for the native addons) → optional model download → slim runtime.
#   docker build -t sourcebound .
#   docker build --build-arg EMBEDDING_MODEL=Xenova/all-MiniLM-L6-v2 -t sourcebound:semantic .
#   docker run -p 8080:8080 -v sourcebound-data:/data sourcebound

ARG NODE_IMAGE=node:20-bookworm-slim

FROM ${NODE_IMAGE} AS build
RUN apt-get update \
 && apt-get install -y --no-install-recommends python3 make g++ \
 && rm -rf /var/lib/apt/lists/*
WORKDIR /app
COPY package.json package-lock.json tsconfig.json tsconfig.build.json ./
COPY src ./src
# `npm ci` runs the prepare script, which compiles src/ to dist/.
RUN npm ci --no-audit --no-fund && npm prune --omit=dev

FROM build AS model
# Leave empty for an image that starts with the built-in hashing embedder; name a model to bake it in
# (this stage needs network access to the model hub at build time, never at run time).
ARG EMBEDDING_MODEL=""
ENV SOURCEBOUND_MODEL_DIR=/app/models
RUN mkdir -p /app/models \
 && if [ -n "$EMBEDDING_MODEL" ]; then node dist/cli.js model pull "$EMBEDDING_MODEL"; fi

FROM ${NODE_IMAGE} AS runtime
ENV NODE_ENV=production \
    HOST=0.0.0.0 \
    PORT=8080 \
    SOURCEBOUND_DATA_DIR=/data \
    SOURCEBOUND_LOG_FORMAT=json \
    SOURCEBOUND_MODEL_DIR=/app/models
WORKDIR /app
COPY --from=build /app/node_modules ./node_modules
COPY --from=build /app/dist ./dist
COPY --from=model /app/models ./models
COPY package.json ./
COPY config ./config
COPY resources ./resources
COPY seed-docs ./seed-docs
RUN mkdir -p /data && chown node:node /data
# The image's unprivileged "node" user (uid 1000) runs the service.
USER node
VOLUME ["/data"]
EXPOSE 8080
HEALTHCHECK --interval=30s --timeout=5s --start-period=60s --retries=3 \
  CMD node -e "fetch('http://127.0.0.1:'+(process.env.PORT||8080)+'/ready').then(r=>process.exit(r.ok?0:1),()=>process.exit(1))"
CMD ["node", "dist/cli.js", "serve"]
