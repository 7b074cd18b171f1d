import type { MountScreen } from '../app-context';

// Placeholder until the listen screen lands (being built in this session).
export const mountListenScreen: MountScreen = (root) => {
  root.textContent = 'Listen';
};
