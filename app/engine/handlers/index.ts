// Every method's handler, by area. The type below makes a method without a handler (or a handler
// without a method) a compile error, so adding a method is: its declaration in
// app/protocol/messages.ts `methods`, and its handler in one of these area files.
import type { Method } from '../../protocol/messages.ts';
import type { Handler } from './context.ts';
import { engineHandlers } from './engine.ts';
import { modelHandlers } from './model.ts';
import { directionHandlers } from './directions.ts';
import { renderHandlers } from './render.ts';
import { discoveryHandlers } from './discovery.ts';
import { auditHandlers } from './audit.ts';
import { repairHandlers } from './repair.ts';
import { projectHandlers } from './project.ts';
import { packHandlers } from './pack.ts';
import { variantHandlers } from './variants.ts';
import { locateHandlers } from './locate.ts';
import { attributeHandlers } from './attributes.ts';
import { farmHandlers } from './farm.ts';

export const handlers: { [M in Method]: Handler<M> } = {
  ...engineHandlers,
  ...modelHandlers,
  ...directionHandlers,
  ...renderHandlers,
  ...discoveryHandlers,
  ...auditHandlers,
  ...repairHandlers,
  ...projectHandlers,
  ...packHandlers,
  ...variantHandlers,
  ...locateHandlers,
  ...attributeHandlers,
  ...farmHandlers,
};
