// Handlers for attributes the lead defines from tagged seeds: define one (a job: renders and
// describes the seeds, fits, cross-validates; saved into the open project unless refused below
// the accuracy floor) and list them with their accuracy.
import { driveSteps, type AreaHandlers } from './context.ts';

export const attributeHandlers: AreaHandlers<'attributes.define' | 'attributes.list'> = {
  'attributes.define': (p, ctx) => {
    const { workspace } = ctx;
    // The attribute is saved into the open project: a read-only window cannot define one.
    workspace.project?.requireWritable();
    return driveSteps(workspace.definedAttributes.define(workspace.requireGenerator(), workspace.project?.dir ?? null, p), ctx);
  },
  'attributes.list': (_p, { workspace }) => workspace.definedAttributes.list(workspace.project?.dir ?? null),
};
