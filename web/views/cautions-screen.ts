import type { MountScreen } from '../app-context';

// Placeholder until the cautions screen lands (being built in this session).
export const mountCautionsScreen: MountScreen = (root) => {
  root.textContent = 'Cautions';
};
