// The program's version, in one place: the CLI's --version, the engine's hello, and the "tool" /
// "createdBy" stamp in audit reports and preset packs all read it. package.json carries the same
// number for npm and electron-builder; a unit test keeps the two equal.
export const PLUMBLINE_VERSION = '0.1.0';

/** How reports and packs name the program that wrote them. */
export const TOOL_STAMP = `plumbline ${PLUMBLINE_VERSION}`;

/** How the engine names itself in engine.hello and engine.ready. */
export const ENGINE_NAME = `plumbline-engine/${PLUMBLINE_VERSION}`;
