import type { MountScreen } from '../app-context';

// Placeholder until the sessions screen lands (being built in this session).
export const mountSessionsScreen: MountScreen = (root) => {
  root.textContent = 'Sessions';
};
