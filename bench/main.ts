/** Entry of `npm run bench` (see runner.ts for the parts and options). */
import { main } from './runner.ts';

process.exitCode = await main(process.argv.slice(2));
