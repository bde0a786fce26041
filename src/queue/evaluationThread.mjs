// Entry of an evaluation thread (evaluationThreadPool.ts): a worker thread does not inherit the TypeScript loader that
// bin/wearshift.js registered on the main thread, so it registers its own before loading the thread's body.
import { register } from 'tsx/esm/api';

register();
await import('./evaluationThread.ts');
