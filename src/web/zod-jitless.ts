/**
 * zod compiles fast validators with `new Function` unless told not to; the page's Content-Security-
 * Policy forbids eval, and merely probing for it shows up as a policy violation. Import this module
 * before any module that builds zod schemas (ES modules evaluate in import order).
 */
import { z } from 'zod';

z.config({ jitless: true });
