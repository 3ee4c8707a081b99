FROM node:20-bookworm-slim
WORKDIR /app
ENV NODE_ENV=production
COPY package.json package-lock.json ./
RUN npm ci --omit=dev --no-audit --no-fund
COPY tsconfig.json ./
COPY src ./src
COPY migrations ./migrations
ENV HOST=0.0.0.0 PORT=8080 DATA_DIR=/var/lib/streamflow
# The data directory (embedded store, demo tokens) belongs to the user the service runs as.
RUN mkdir -p /var/lib/streamflow && chown node:node /var/lib/streamflow && chmod 0700 /var/lib/streamflow
VOLUME ["/var/lib/streamflow"]
EXPOSE 8080
# Slim images have no curl: Node's own fetch asks /readyz (the process answers and its database too).
HEALTHCHECK --interval=30s --timeout=5s --start-period=60s --retries=3 \
  CMD ["node", "-e", "fetch('http://127.0.0.1:' + (process.env.PORT || 8080) + '/readyz').then((r) => process.exit(r.ok ? 0 : 1), () => process.exit(1))"]
USER node
CMD ["node", "--import", "tsx", "src/main.ts"]
