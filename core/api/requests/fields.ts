/** Field schemas shared by the request modules. */
import { z } from 'zod';

export const filePath = z.string().min(1).max(4096);
export const layerName = z.string().min(1).max(1024);
export const labelName = z.string().min(1).max(1024);
export const unitIndex = z.number().int().min(0);
