FROM node:20-bookworm-slim
WORKDIR /app
ENV NODE_ENV=production
COPY package.json package-lock.json ./
RUN npm ci --omit=dev --no-audit --no-fund
COPY tsconfig.json ./
COPY src ./src
COPY migrations ./migrations
ENV HOST=0.0.0.0 PORT=8080 DATA_DIR=/var/lib/streamflow
EXPOSE 8080
USER node
CMD ["node", "--import", "tsx", "src/main.ts"]
