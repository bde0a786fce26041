# wearshift in one container: `wearshift serve` (queue workers and the HTTP API). Redis runs beside it
# (see docker-compose.yml). The TypeScript sources run through tsx, so there is no build step.
FROM node:20-bookworm-slim
WORKDIR /app
ENV NODE_ENV=production
COPY package.json package-lock.json ./
# No install scripts: every dependency works without them (resvg ships prebuilt binaries as optional packages).
RUN npm ci --omit=dev --ignore-scripts && npm cache clean --force
COPY bin ./bin
COPY src ./src
COPY schemas ./schemas
COPY tsconfig.json ./
USER node
EXPOSE 8080
CMD ["node", "bin/wearshift.js", "serve"]
