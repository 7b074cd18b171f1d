import type { MountScreen } from '../app-context';

// Placeholder until the duct screen lands (being built in this session).
export const mountDuctScreen: MountScreen = (root) => {
  root.textContent = 'Duct';
};
