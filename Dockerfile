# wearshift in one container: `wearshift serve` (queue workers and the HTTP API). Redis runs beside it
# (see docker-compose.yml). The sources are compiled in a build stage; the image holds the production dependencies
# only (no TypeScript compiler, no demo mail server) and runs the compiled build in dist/.
FROM node:20-bookworm-slim AS build
WORKDIR /app
COPY package.json package-lock.json ./
# No install scripts: every dependency works without them (resvg ships prebuilt binaries as optional packages).
RUN npm ci --ignore-scripts
COPY bin ./bin
COPY src ./src
COPY tsconfig.json tsconfig.build.json ./
RUN npm run build

FROM node:20-bookworm-slim
WORKDIR /app
ENV NODE_ENV=production
COPY package.json package-lock.json ./
RUN npm ci --omit=dev --ignore-scripts && npm cache clean --force
COPY bin ./bin
COPY --from=build /app/src ./src
COPY --from=build /app/dist ./dist
COPY schemas ./schemas
COPY tsconfig.json ./
# The command runs dist/ while its recorded signature matches src/ (bin/sourceSignature.mjs): recorded for the
# sources as they lie here, so a copy that changed file times cannot send it looking for a compiler.
RUN node --input-type=module -e "import { writeFileSync } from 'node:fs'; import { sourceSignature } from './bin/sourceSignature.mjs'; writeFileSync('dist/.source-signature', sourceSignature('src'));"
USER node
EXPOSE 8080
CMD ["node", "bin/wearshift.js", "serve"]
